#include "harness/broker/broker_session.h"

#include <algorithm>
#include <cmath>
#include <string>

#include "absl/strings/str_cat.h"

namespace weir {
namespace {

// Whole milliseconds, rounded up: a retry-after must never be shorter than
// the real wait, or a connector that honours it exactly would still be early.
std::int64_t CeilMillis(VirtualDuration d) { return std::max<std::int64_t>(1, (d + 999999) / 1000000); }

// RFC 2697 §3 refills the bucket by one token "CIR times per second"; the
// number of refills in [0, t] is floor(t * rate / 1 s).
std::int64_t Ticks(VirtualTime t, double rate_per_s) {
  return static_cast<std::int64_t>(std::floor(static_cast<long double>(t) * rate_per_s / 1e9L));
}

std::int64_t LatencyMs(const FaultSource& f, const std::string& stream, std::uint64_t k,
                       const v1::FaultConfig::Latency& c) {
  auto exponential = [&](std::int64_t mean_ms) {
    const double u = f.Unit(stream, k, 2);
    return static_cast<std::int64_t>(std::llround(-static_cast<double>(mean_ms) * std::log1p(-u)));
  };
  switch (c.distribution()) {
    case v1::FaultConfig::UNIFORM:
      return c.min_ms() <= c.max_ms() ? f.Int(stream, k, c.min_ms(), c.max_ms()) : c.min_ms();
    case v1::FaultConfig::EXPONENTIAL: return exponential(c.mean_ms());
    case v1::FaultConfig::LONG_TAIL:
      return f.Unit(stream, k, 3) < c.tail_probability() ? c.tail_ms() : exponential(c.mean_ms());
    default: return c.fixed_ms();
  }
}

}  // namespace

void BrokerSession::BeginCall(VirtualTime now) {
  in_call_ = true;
  now_ = now;
  calls_in_window_ = 0;
}

VirtualTime BrokerSession::EndCall() {
  in_call_ = false;
  return now_;
}

bool BrokerSession::TakeToken(VirtualDuration* wait) {
  const auto& b = faults_.config().token_bucket();
  const std::int64_t burst = b.burst();
  if (tokens_ < 0) {  // RFC 2697: the bucket is full at time 0
    tokens_ = burst;
    ticks_ = 0;
  }
  const std::int64_t ticks = Ticks(now_, b.rate_per_s());
  if (ticks > ticks_) tokens_ = std::min(burst, tokens_ + (ticks - ticks_));
  ticks_ = std::max(ticks_, ticks);
  if (tokens_ >= 1) {
    --tokens_;
    return true;
  }
  // The next refill: the first time t with Ticks(t) > ticks_.
  const std::int64_t n = ticks_ + 1;
  VirtualTime t = static_cast<VirtualTime>(std::ceil(static_cast<long double>(n) * 1e9L / b.rate_per_s()));
  while (Ticks(t, b.rate_per_s()) < n) ++t;  // guard against rounding
  *wait = std::max<VirtualDuration>(1, t - now_);
  return false;
}

bool BrokerSession::Throttled(v1::Site site, std::uint64_t position, VirtualDuration* retry_after) {
  const auto& cfg = faults_.config();
  auto d = faults_.Decide(site, position, v1::FaultDecision::kThrottleRetryAfterMs, now_, [&](v1::FaultDecision* out) {
    for (const auto& w : cfg.throttle_windows()) {
      if (Millis(w.start_ms()) <= now_ && now_ < Millis(w.end_ms())) {
        out->set_throttle_retry_after_ms(CeilMillis(Millis(w.end_ms()) - now_));
        return true;
      }
    }
    if (!cfg.has_token_bucket() || cfg.token_bucket().rate_per_s() <= 0) return false;
    VirtualDuration wait = 0;
    if (TakeToken(&wait)) return false;
    out->set_throttle_retry_after_ms(CeilMillis(wait));
    return true;
  });
  if (!d.has_value()) return false;
  *retry_after = Millis(std::max<std::int64_t>(0, d->throttle_retry_after_ms()));
  return true;
}

void BrokerSession::TraceFailure(const char* method, const CallStatus& status, std::optional<std::uint32_t> partition) {
  auto& e = trace_.Append(now_);
  auto* x = e.mutable_broker_call_failed();
  x->set_method(method);
  x->set_code(static_cast<int>(status.code));
  x->set_retry_after_ns(status.retry_after);
  if (partition.has_value()) x->set_partition(*partition);
  trace_.Commit();
}

void BrokerSession::AdvanceModel() {
  if (log_ != nullptr) {
    log_->AdvanceTo(now_);
  } else {
    queue_->AdvanceTo(now_);
  }
}

bool BrokerSession::ShapeMatches(const char* method, bool log_call, CallStatus* status) {
  if (log_call == (log_ != nullptr)) return true;
  status->now = now_;
  status->code = CallCode::kFailedPrecondition;
  status->message = absl::StrCat(method, " is a ", log_call ? "log" : "queue", " call, but this run's broker is a ",
                                 log_call ? "queue" : "log");
  auto& e = trace_.Append(now_);
  auto* x = e.mutable_protocol_error();
  x->set_call(method);
  x->set_detail(status->message);
  trace_.Commit();
  return false;
}

bool BrokerSession::Enter(const char* method, v1::Site site, CallStatus* status, std::uint64_t* position,
                          std::optional<std::uint32_t> partition) {
  status->now = now_;
  if (!in_call_) {
    status->code = CallCode::kFailedPrecondition;
    status->message = "broker call outside a connector call";
    auto& e = trace_.Append(now_);
    auto* x = e.mutable_protocol_error();
    x->set_call(method);
    x->set_detail(status->message);
    trace_.Commit();
    return false;
  }
  // Whatever fell due while earlier calls of this window waited (latency, a
  // failed call) is traced before this call: trace order stays time order.
  AdvanceModel();
  ++calls_in_window_;
  ++calls_total_;
  max_calls_in_window_ = std::max(max_calls_in_window_, calls_in_window_);
  const std::uint64_t k = ++calls_[site];
  *position = k;
  {
    auto& e = trace_.Append(now_);
    e.mutable_broker_call()->set_method(method);
    e.mutable_broker_call()->set_position(k);
    if (partition.has_value()) e.mutable_broker_call()->set_partition(*partition);
    trace_.Commit();
  }

  // Each kind draws from its own stream, named by kind and method, so pull #3
  // and ack #3 are independent and no kind moves another's draws.
  const auto& cfg = faults_.config();
  const std::string latency_stream = absl::StrCat("latency.", method);
  auto latency = faults_.Decide(site, k, v1::FaultDecision::kLatencyMs, now_, [&](v1::FaultDecision* out) {
    if (!faults_.Chance(latency_stream, k, cfg.latency().rate())) return false;
    const std::int64_t ms = LatencyMs(faults_, latency_stream, k, cfg.latency());
    if (ms <= 0) return false;
    out->set_latency_ms(ms);
    return true;
  });
  if (latency.has_value() && latency->latency_ms() > 0) {
    now_ = SaturatingAdd(now_, Millis(latency->latency_ms()));
    AdvanceModel();  // before a throttle or transient failure is traced at the new now
  }
  status->now = now_;

  VirtualDuration retry_after = 0;
  if (Throttled(site, k, &retry_after)) {
    status->code = CallCode::kResourceExhausted;
    status->message = "throttled";
    status->retry_after = retry_after;
    TraceFailure(method, *status, partition);
    return false;
  }

  const std::string unavailable_stream = absl::StrCat("unavailable.", method);
  const std::string deadline_stream = absl::StrCat("deadline_exceeded.", method);
  auto transient = faults_.Decide(site, k, v1::FaultDecision::kTransient, now_, [&](v1::FaultDecision* out) {
    if (faults_.Chance(unavailable_stream, k, cfg.unavailable_rate())) {
      out->mutable_transient()->set_code(v1::UNAVAILABLE);
      return true;
    }
    if (faults_.Chance(deadline_stream, k, cfg.deadline_exceeded_rate())) {
      out->mutable_transient()->set_code(v1::DEADLINE_EXCEEDED);
      return true;
    }
    return false;
  });
  if (transient.has_value()) {
    const bool deadline = transient->transient().code() == v1::DEADLINE_EXCEEDED;
    status->code = deadline ? CallCode::kDeadlineExceeded : CallCode::kUnavailable;
    status->message = deadline ? "deadline exceeded (transient)" : "broker unavailable (transient)";
    TraceFailure(method, *status, partition);
    return false;
  }
  return true;
}

void BrokerSession::OnStrayCall(const std::string& method) {
  auto& e = trace_.Append(now_);
  auto* x = e.mutable_protocol_error();
  x->set_call(method);
  x->set_detail("broker call outside a connector call");
  trace_.Commit();
}

CallStatus BrokerSession::Pull(const v1::PullRequest& request, v1::PullResponse* response) {
  CallStatus status;
  std::uint64_t k = 0;
  if (!ShapeMatches("Pull", false, &status) || !Enter("Pull", v1::PULL, &status, &k)) {
    response->set_now_ns(status.now);
    return status;
  }
  queue_->Pull(request, now_, response, k);
  return status;
}

CallStatus BrokerSession::Ack(const v1::AckRequest& request, v1::AckResponse* response) {
  CallStatus status;
  std::uint64_t k = 0;
  if (ShapeMatches("Ack", false, &status) && Enter("Ack", v1::ACK, &status, &k)) {
    queue_->Ack(request, now_, k);
  }
  response->set_now_ns(status.now);
  return status;
}

CallStatus BrokerSession::Nack(const v1::NackRequest& request, v1::NackResponse* response) {
  CallStatus status;
  std::uint64_t k = 0;
  if (ShapeMatches("Nack", false, &status) && Enter("Nack", v1::NACK, &status, &k)) {
    queue_->Nack(request, now_);
  }
  response->set_now_ns(status.now);
  return status;
}

CallStatus BrokerSession::ExtendLease(const v1::ExtendLeaseRequest& request, v1::ExtendLeaseResponse* response) {
  CallStatus status;
  std::uint64_t k = 0;
  if (!ShapeMatches("ExtendLease", false, &status) || !Enter("ExtendLease", v1::EXTEND_LEASE, &status, &k)) {
    response->set_now_ns(status.now);
    return status;
  }
  queue_->ExtendLease(request, now_, response);
  return status;
}

CallStatus BrokerSession::ListPartitions(const v1::ListPartitionsRequest& /*request*/,
                                         v1::ListPartitionsResponse* response) {
  CallStatus status;
  std::uint64_t k = 0;
  if (!ShapeMatches("ListPartitions", true, &status) || !Enter("ListPartitions", v1::LIST_PARTITIONS, &status, &k)) {
    response->set_now_ns(status.now);
    return status;
  }
  log_->ListPartitions(now_, response);
  return status;
}

CallStatus BrokerSession::Read(const v1::ReadRequest& request, v1::ReadResponse* response) {
  CallStatus status;
  std::uint64_t k = 0;
  if (!ShapeMatches("Read", true, &status) || !Enter("Read", v1::READ, &status, &k, request.partition())) {
    response->set_now_ns(status.now);
    return status;
  }
  status = log_->Read(request, &now_, response, k);
  status.now = now_;
  response->set_now_ns(now_);
  if (!status.ok()) TraceFailure("Read", status, request.partition());
  return status;
}

CallStatus BrokerSession::SaveBookmarks(const v1::SaveBookmarksRequest& request, v1::SaveBookmarksResponse* response) {
  CallStatus status;
  std::uint64_t k = 0;
  if (ShapeMatches("SaveBookmarks", true, &status) && Enter("SaveBookmarks", v1::SAVE_BOOKMARKS, &status, &k)) {
    status = log_->SaveBookmarks(request, now_, k);
    status.now = now_;
    if (!status.ok()) TraceFailure("SaveBookmarks", status);
  }
  response->set_now_ns(status.now);
  return status;
}

CallStatus BrokerSession::LoadBookmarks(const v1::LoadBookmarksRequest& /*request*/,
                                        v1::LoadBookmarksResponse* response) {
  CallStatus status;
  std::uint64_t k = 0;
  if (!ShapeMatches("LoadBookmarks", true, &status) || !Enter("LoadBookmarks", v1::LOAD_BOOKMARKS, &status, &k)) {
    response->set_now_ns(status.now);
    return status;
  }
  log_->LoadBookmarks(now_, response);
  return status;
}

}  // namespace weir
