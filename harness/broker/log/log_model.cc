#include "harness/broker/log/log_model.h"

#include <algorithm>

#include "absl/strings/str_cat.h"
#include "harness/core/crc32c.h"
#include "harness/core/prng.h"

namespace weir {
namespace {

constexpr std::uint32_t kDefaultKeys = 64;
constexpr std::uint32_t kDefaultMaxRead = 64;
constexpr std::int64_t kDefaultMaxWaitMs = 1000;
constexpr std::int64_t kDefaultRestartMs = 500;

// A pure function of (seed, name, index): draws that need no stream state.
std::uint64_t Draw(std::uint64_t seed, std::string_view name, std::uint64_t index) {
  return Mix64(seed ^ Mix64(index ^ Fnv1a64(name)));
}

double DrawUnit(std::uint64_t seed, std::string_view name, std::uint64_t index) {
  return static_cast<double>(Draw(seed, name, index) >> 11) * 0x1.0p-53;
}

}  // namespace

std::uint32_t Fnv1a32(std::string_view bytes) {
  std::uint32_t h = 2166136261u;
  for (unsigned char c : bytes) {
    h ^= c;
    h *= 16777619u;
  }
  return h;
}

LogModel::LogModel(const v1::Scenario& scenario, std::uint64_t seed, TraceLog& trace, FaultSource& faults)
    : scenario_(scenario),
      config_(scenario.log()),
      seed_(seed),
      trace_(trace),
      faults_(faults),
      workload_(scenario.workload(), seed) {
  growth_.assign(config_.growth().begin(), config_.growth().end());
  std::stable_sort(growth_.begin(), growth_.end(), [](const auto& a, const auto& b) { return a.at_ms() < b.at_ms(); });
  last_change_time_ = workload_.last_publish_time();
  for (const auto& g : growth_) last_change_time_ = std::max(last_change_time_, Millis(g.at_ms()));
  // The partitions of the start exist before anything else: not traced.
  const std::uint32_t initial = std::max<std::uint32_t>(1, config_.partitions());
  for (std::uint32_t i = 0; i < initial; ++i) AddPartitions(1, -1);
}

void LogModel::AddPartitions(std::uint32_t count, VirtualTime at) {
  for (std::uint32_t i = 0; i < count; ++i) {
    const auto p = static_cast<std::uint32_t>(partitions_.size());
    Partition part;
    const std::int64_t max_lag = config_.max_partition_lag_ms();
    part.lag = max_lag > 0 ? Millis(static_cast<std::int64_t>(Draw(seed_, "log.partition_lag", p) %
                                                              static_cast<std::uint64_t>(max_lag + 1)))
                           : 0;
    part.idle = std::find(config_.idle_partitions().begin(), config_.idle_partitions().end(), p) !=
                config_.idle_partitions().end();
    partitions_.push_back(std::move(part));
    if (at >= 0) {
      auto& e = trace_.Append(at);
      e.mutable_partition_added()->set_partition(p);
      trace_.Commit();
    }
  }
}

std::string LogModel::KeyBytes(std::uint32_t key) const {
  return key == kHotKey ? std::string("hot") : absl::StrCat("key-", key);
}

std::uint32_t LogModel::Place(std::uint32_t key) const {
  const auto n = static_cast<std::uint32_t>(partitions_.size());
  std::uint32_t p = Fnv1a32(KeyBytes(key)) % n;
  for (std::uint32_t i = 0; i < n && partitions_[p].idle; ++i) p = (p + 1) % n;
  return p;
}

void LogModel::Append(const MessageSpec& spec) {
  const std::uint64_t k = spec.id;
  const std::uint32_t keys = config_.keys() > 0 ? config_.keys() : kDefaultKeys;
  std::uint32_t key = static_cast<std::uint32_t>(Draw(seed_, "log.key", k) % keys);
  if (config_.hot_key_share() > 0 && DrawUnit(seed_, "log.hot", k) < config_.hot_key_share()) {
    key = kHotKey;
  }
  const std::uint32_t p = Place(key);
  Partition& part = partitions_[p];
  Rec r;
  r.append_time = spec.publish_time;
  r.event_time = std::max<VirtualTime>(0, spec.event_time - part.lag);
  r.seq = k;
  r.key = key;
  r.crc = Crc32c(MessagePayload(seed_, k, scenario_.workload().payload_bytes()));
  const std::uint64_t offset = part.next++;
  part.records.push_back(r);
  ++appended_;

  const auto& cfg = faults_.config();
  auto delay = faults_.Decide(
      v1::APPEND, k, v1::FaultDecision::kVisibilityDelayMs, spec.publish_time, [&](v1::FaultDecision* out) {
        if (cfg.max_visibility_delay_ms() <= 0) return false;
        if (!faults_.Chance("visibility_delay", k, cfg.visibility_delay_rate())) {
          return false;
        }
        out->set_visibility_delay_ms(faults_.Int("visibility_delay", k, 1, cfg.max_visibility_delay_ms()));
        return true;
      });
  VirtualTime visible_at = spec.publish_time;
  if (delay.has_value() && delay->visibility_delay_ms() > 0) {
    visible_at = SaturatingAdd(spec.publish_time, Millis(delay->visibility_delay_ms()));
    part.hidden.push_back(Hidden{offset, visible_at});
  }
  {
    auto& e = trace_.Append(spec.publish_time);
    auto* x = e.mutable_appended();
    x->set_partition(p);
    x->set_offset(offset);
    x->set_event_time_ns(r.event_time);
    x->set_payload_crc32c(r.crc);
    if (visible_at > spec.publish_time) x->set_visible_at_ns(visible_at);
    trace_.Commit();
  }
  if (config_.retention_ms() > 0) {
    expiries_.push_back(Expiry{SaturatingAdd(spec.publish_time, Millis(config_.retention_ms())), p, offset});
  }
  if (config_.retention_records() > 0 && part.records.size() > config_.retention_records()) {
    DeleteOldest(p);
    TraceRetention(p, spec.publish_time);
  }
}

bool LogModel::DeleteOldest(std::uint32_t p) {
  Partition& part = partitions_[p];
  if (part.records.empty()) return false;
  part.records.pop_front();
  ++part.first_retained;
  while (!part.hidden.empty() && part.hidden.front().offset < part.first_retained) {
    part.hidden.pop_front();
  }
  return true;
}

void LogModel::TraceRetention(std::uint32_t p, VirtualTime at) {
  auto& e = trace_.Append(at);
  auto* x = e.mutable_retention_deleted();
  x->set_partition(p);
  x->set_first_retained_offset(partitions_[p].first_retained);
  trace_.Commit();
}

void LogModel::AdvanceTo(VirtualTime now) {
  if (now < now_) return;
  now_ = now;
  for (;;) {
    const MessageSpec* next = workload_.Peek();
    const VirtualTime publish_at = next != nullptr ? next->publish_time : kNever;
    const VirtualTime growth_at = next_growth_ < growth_.size() ? Millis(growth_[next_growth_].at_ms()) : kNever;
    const VirtualTime expiry_at = expiries_.empty() ? kNever : expiries_.front().at;
    const VirtualTime at = std::min({publish_at, growth_at, expiry_at});
    if (at > now || at == kNever) break;
    if (growth_at == at) {  // new partitions first: a record due at the same time may land there
      AddPartitions(growth_[next_growth_].count(), at);
      ++next_growth_;
    } else if (expiry_at == at) {
      // Every deletion due before the next other change, one event per partition.
      const VirtualTime until = std::min({publish_at, growth_at, now + 1});
      std::vector<std::uint32_t> touched;
      VirtualTime last = at;
      while (!expiries_.empty() && (expiries_.front().at < until || expiries_.front().at == at)) {
        const Expiry x = expiries_.front();
        expiries_.pop_front();
        if (x.offset < partitions_[x.partition].first_retained) continue;  // gone by count
        DeleteOldest(x.partition);
        touched.push_back(x.partition);
        last = x.at;
      }
      std::sort(touched.begin(), touched.end());
      touched.erase(std::unique(touched.begin(), touched.end()), touched.end());
      for (std::uint32_t p : touched) TraceRetention(p, last);
    } else {
      const MessageSpec spec = *next;
      workload_.Pop();
      Append(spec);
    }
  }
}

bool LogModel::all_published() const { return workload_.Peek() == nullptr && next_growth_ >= growth_.size(); }

std::uint64_t LogModel::ReadableEnd(const Partition& p, VirtualTime now) const {
  for (const Hidden& h : p.hidden) {
    if (h.visible_at > now) return h.offset;
  }
  return p.next;
}

VirtualTime LogModel::NextChange(const Partition& p) const {
  VirtualTime t = kNever;
  if (const MessageSpec* next = workload_.Peek(); next != nullptr) t = next->publish_time;
  if (next_growth_ < growth_.size()) t = std::min(t, Millis(growth_[next_growth_].at_ms()));
  for (const Hidden& h : p.hidden) {
    if (h.visible_at > now_) {
      t = std::min(t, h.visible_at);
      break;
    }
  }
  return t;
}

bool LogModel::IdleAt(VirtualTime now) const {
  if (const MessageSpec* next = workload_.Peek(); next != nullptr && next->publish_time <= now) {
    return false;
  }
  if (next_growth_ < growth_.size() && Millis(growth_[next_growth_].at_ms()) <= now) return false;
  for (const Partition& p : partitions_) {
    if (p.read_next < ReadableEnd(p, now)) return false;
  }
  return true;
}

void LogModel::OnIncarnationStart() {
  for (Partition& p : partitions_) p.read_next = 0;
}

std::optional<RecordKey> LogModel::Identify(const v1::Record& record, std::string* why) const {
  if (!record.has_offset()) {
    *why = absl::StrCat("names no offset (message id ", record.message_id(),
                        "), but this run's broker is a log: a record names a partition and an offset");
    return std::nullopt;
  }
  if (record.partition() >= partitions_.size()) {
    *why = absl::StrCat("names partition ", record.partition(), ", which does not exist (", partitions_.size(),
                        " partitions)");
    return std::nullopt;
  }
  if (record.offset() >= partitions_[record.partition()].next) {
    *why = absl::StrCat("names offset ", record.offset(), " of partition ", record.partition(),
                        ", which was never appended (next offset ", partitions_[record.partition()].next, ")");
    return std::nullopt;
  }
  return LogRecordKey(record.partition(), record.offset());
}

bool LogModel::Drained(const CommittedView& committed) const {
  if (!all_published()) return false;
  for (std::uint32_t p = 0; p < partitions_.size(); ++p) {
    const Partition& part = partitions_[p];
    if (!committed.Covers(LogRecordKey(p, part.first_retained), LogRecordKey(p, part.next))) {
      return false;
    }
  }
  return true;
}

std::size_t LogModel::retained_records() const {
  std::size_t n = 0;
  for (const Partition& p : partitions_) n += p.records.size();
  return n;
}

void LogModel::ListPartitions(VirtualTime now, v1::ListPartitionsResponse* response) {
  AdvanceTo(now);
  response->set_now_ns(now);
  for (std::uint32_t p = 0; p < partitions_.size(); ++p) {
    auto* x = response->add_partitions();
    x->set_partition(p);
    x->set_first_retained_offset(partitions_[p].first_retained);
    x->set_next_offset(partitions_[p].next);
  }
}

CallStatus LogModel::Read(const v1::ReadRequest& request, VirtualTime* now, v1::ReadResponse* response,
                          std::uint64_t position) {
  AdvanceTo(*now);
  CallStatus status;
  status.now = *now;
  const std::uint32_t p = request.partition();
  if (p >= partitions_.size()) {
    status.code = CallCode::kInvalidArgument;
    status.message = absl::StrCat("partition ", p, " does not exist (", partitions_.size(), " partitions)");
    return status;
  }
  const auto& cfg = faults_.config();
  const VirtualTime t = *now;
  auto restart = faults_.Decide(v1::READ, position, v1::FaultDecision::kBrokerRestart, t, [&](v1::FaultDecision* out) {
    if (!faults_.Chance("broker_restart", position, cfg.broker_restart_rate())) {
      return false;
    }
    out->set_broker_restart(true);
    return true;
  });
  if (restart.has_value() && restart->broker_restart()) {
    const VirtualTime until =
        SaturatingAdd(t, Millis(config_.broker_restart_ms() > 0 ? config_.broker_restart_ms() : kDefaultRestartMs));
    for (Partition& part : partitions_) part.unavailable_until = std::max(part.unavailable_until, until);
  }
  auto outage =
      faults_.Decide(v1::READ, position, v1::FaultDecision::kPartitionOutageMs, t, [&](v1::FaultDecision* out) {
        if (cfg.max_partition_outage_ms() <= 0) return false;
        if (!faults_.Chance("partition_outage", position, cfg.partition_outage_rate())) return false;
        out->set_partition_outage_ms(faults_.Int("partition_outage", position, 1, cfg.max_partition_outage_ms()));
        return true;
      });
  Partition& part = partitions_[p];
  if (outage.has_value() && outage->partition_outage_ms() > 0) {
    part.unavailable_until = std::max(part.unavailable_until, SaturatingAdd(t, Millis(outage->partition_outage_ms())));
  }
  if (t < part.unavailable_until) {
    status.code = CallCode::kUnavailable;
    status.message = absl::StrCat("partition ", p, " is unavailable until ", FormatTime(part.unavailable_until));
    return status;
  }

  auto out_of_range = [&](const std::string& message) {
    status.code = CallCode::kOutOfRange;
    status.message = message;
    status.first_retained_offset = part.first_retained;
    auto& e = trace_.Append(*now);
    auto* x = e.mutable_log_read();
    x->set_partition(p);
    x->set_offset(request.offset());
    x->set_out_of_range(true);
    x->set_first_retained_offset(part.first_retained);
    trace_.Commit();
    return status;
  };
  if (request.offset() < part.first_retained) {
    return out_of_range(absl::StrCat("offset ", request.offset(), " of partition ", p,
                                     " was deleted by retention; the first retained offset is ", part.first_retained));
  }
  if (request.offset() > part.next) {
    return out_of_range(absl::StrCat("offset ", request.offset(), " of partition ", p,
                                     " is beyond its end (next offset ", part.next, ")"));
  }

  const std::int64_t max_wait_ms = config_.max_wait_ms() > 0 ? config_.max_wait_ms() : kDefaultMaxWaitMs;
  const VirtualDuration wait = std::min(request.max_wait_ns(), Millis(max_wait_ms));
  if (wait > 0 && ReadableEnd(part, *now) <= request.offset()) {
    const VirtualTime deadline = SaturatingAdd(*now, wait);
    while (ReadableEnd(part, *now) <= request.offset() && *now < deadline) {
      *now = std::min(deadline, NextChange(part));
      AdvanceTo(*now);
    }
    status.now = *now;
    if (request.offset() < part.first_retained) {
      return out_of_range(absl::StrCat("offset ", request.offset(), " of partition ", p,
                                       " was deleted by retention; the first retained offset is ",
                                       part.first_retained));
    }
  }

  const std::uint64_t end = ReadableEnd(part, *now);
  response->set_now_ns(*now);
  response->set_partition(p);
  response->set_first_retained_offset(part.first_retained);
  response->set_readable_end(end);
  bool emptied = false;
  if (end > request.offset()) {
    auto empty = faults_.Decide(v1::READ, position, v1::FaultDecision::kEmptyRead, *now, [&](v1::FaultDecision* out) {
      if (!faults_.Chance("empty_read", position, cfg.empty_read_rate())) {
        return false;
      }
      out->set_empty_read(true);
      return true;
    });
    emptied = empty.has_value() && empty->empty_read();
  }
  const std::uint32_t cap = config_.max_read() > 0 ? config_.max_read() : kDefaultMaxRead;
  const std::uint32_t max = request.max_records() == 0 ? cap : std::min(request.max_records(), cap);
  std::uint64_t offset = request.offset();
  std::uint64_t bytes = 0;
  const std::uint32_t payload_bytes = scenario_.workload().payload_bytes();
  while (!emptied && offset < end && static_cast<std::uint64_t>(response->records_size()) < max) {
    if (request.max_bytes() > 0 && response->records_size() > 0 && bytes + payload_bytes > request.max_bytes()) {
      break;
    }
    const Rec& r = part.records[static_cast<std::size_t>(offset - part.first_retained)];
    auto* x = response->add_records();
    x->set_offset(offset);
    x->set_key(KeyBytes(r.key));
    x->set_payload(MessagePayload(seed_, r.seq, payload_bytes));
    x->set_payload_crc32c(r.crc);
    x->set_event_time_ns(r.event_time);
    x->set_append_time_ns(r.append_time);
    bytes += payload_bytes;
    ++offset;
  }
  response->set_next_offset(offset);
  part.read_next = offset;

  auto& e = trace_.Append(*now);
  auto* x = e.mutable_log_read();
  x->set_partition(p);
  x->set_offset(request.offset());
  x->set_records(static_cast<std::uint32_t>(response->records_size()));
  x->set_next_offset(offset);
  x->set_first_retained_offset(part.first_retained);
  x->set_emptied(emptied);
  trace_.Commit();
  return status;
}

CallStatus LogModel::SaveBookmarks(const v1::SaveBookmarksRequest& request, VirtualTime now, std::uint64_t position) {
  AdvanceTo(now);
  CallStatus status;
  status.now = now;
  for (const auto& b : request.bookmarks()) {
    if (b.partition() >= partitions_.size()) {
      status.code = CallCode::kInvalidArgument;
      status.message = absl::StrCat("bookmark for partition ", b.partition(), ", which does not exist (",
                                    partitions_.size(), " partitions)");
      return status;
    }
  }
  auto lost =
      faults_.Decide(v1::SAVE_BOOKMARKS, position, v1::FaultDecision::kLostBookmark, now, [&](v1::FaultDecision* out) {
        if (!faults_.Chance("lost_bookmark", position, faults_.config().lost_bookmark_rate())) {
          return false;
        }
        out->set_lost_bookmark(true);
        return true;
      });
  const bool is_lost = lost.has_value() && lost->lost_bookmark();
  for (const auto& b : request.bookmarks()) {
    if (!is_lost) bookmarks_[b.partition()] = b.next_offset();
    auto& e = trace_.Append(now);
    auto* x = e.mutable_bookmark_saved();
    x->set_partition(b.partition());
    x->set_next_offset(b.next_offset());
    x->set_lost(is_lost);
    trace_.Commit();
  }
  return status;
}

void LogModel::LoadBookmarks(VirtualTime now, v1::LoadBookmarksResponse* response) {
  AdvanceTo(now);
  response->set_now_ns(now);
  for (const auto& [p, offset] : bookmarks_) {
    auto* x = response->add_bookmarks();
    x->set_partition(p);
    x->set_next_offset(offset);
  }
}

}  // namespace weir
