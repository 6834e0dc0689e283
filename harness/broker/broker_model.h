// File: broker_model.h
//
// What the runtime and the run wiring need from a broker model, whatever its
// shape. weir has two: the queue (harness/broker/queue/queue_model.h: pull,
// lease, ack) and the log (harness/broker/log/log_model.h: partitions,
// offsets, retention, bookmarks). The connector reaches a model's own calls
// through a BrokerSession; the runtime only ever sees this interface.
//
// Records and their identity. Every record a connector emits names what it
// was produced from: a message id (queue) or a partition and an offset (log).
// Identify() checks that against what the broker holds and turns it into a
// RecordKey (record_key.h), the one identity the commit store, the drain rule
// and the counts use.
//
// Time: models are lazy; AdvanceTo(now) applies everything due at or before
// now (publishes, appends, lease expiries, retention, new partitions) in time
// order and traces it.
//
// Thread safety: none; the simulation thread owns the model.
#pragma once

#include <cstdint>
#include <optional>
#include <string>

#include "harness/core/virtual_time.h"
#include "harness/core/record_key.h"
#include "weir/v1/connector.pb.h"

namespace weir {

// The committed output as the drain rule needs to see it (the runtime's
// commit store implements it).
class CommittedView {
 public:
  virtual ~CommittedView() = default;
  // Distinct keys with at least one committed record.
  virtual std::uint64_t distinct() const = 0;
  // True when every key in [from, to) has a committed record (from >= to: true).
  virtual bool Covers(RecordKey from, RecordKey to) const = 0;
};

class BrokerModel {
 public:
  virtual ~BrokerModel() = default;

  virtual v1::SourceShape shape() const = 0;

  // Applies every scheduled change at or before now, in time order.
  virtual void AdvanceTo(VirtualTime now) = 0;
  // True when the connector could get nothing new from the broker now, even
  // after AdvanceTo(now): nothing deliverable (queue) or every partition read
  // to its readable end (log), and nothing due. Changes nothing.
  virtual bool IdleAt(VirtualTime now) const = 0;

  // The workload: how many items (messages or records) it publishes, how
  // many are out, whether all are, and when the last one goes out.
  virtual std::uint64_t total_messages() const = 0;
  virtual std::uint64_t published() const = 0;
  virtual bool all_published() const = 0;
  virtual VirtualTime last_publish_time() const = 0;

  // The key of the record `record` names, or nullopt when it names nothing
  // this broker ever held (then *why says what, in a clause for a report).
  virtual std::optional<RecordKey> Identify(const v1::Record& record, std::string* why) const = 0;

  // True when nothing more can reach the committed output: every item is
  // out and each has a committed record, or (log) was deleted by retention
  // before it was committed.
  virtual bool Drained(const CommittedView& committed) const = 0;

  // Log shape: partitions 0 .. partition_count() - 1 exist now (queue: 0).
  virtual std::uint32_t partition_count() const { return 0; }
  // Log shape: the next offset partition p will append (0 in the queue shape).
  virtual std::uint64_t partition_end(std::uint32_t /*p*/) const { return 0; }

  // A new incarnation starts: it has read nothing yet.
  virtual void OnIncarnationStart() {}

  // Calls or receipts the broker refused to apply because they held nothing
  // (see the model); a figure for reports.
  virtual std::uint64_t ignored_receipts() const { return 0; }
};

}  // namespace weir
