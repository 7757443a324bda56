#pragma once
// KafkaSink: publishes JSON events (flags, alerts, model changes, dead letters, state snapshots)
// to one topic per kind with an idempotent producer, keyed by series, without ever blocking the
// caller for long: Publish() puts the event on a bounded queue that a producer thread drains
// into librdkafka and polls for delivery reports. Overflow follows a named policy. Failed
// deliveries are counted and re-queued up to Options::max_redeliveries times (readers drop
// repeats by the event id); after that they are counted as lost and logged.
//
// Thread-safety: Publish, Flush and Counters may be called from any thread. One producer thread
// is owned by the sink.

#include <array>
#include <cstdint>
#include <memory>
#include <string>
#include <string_view>

#include "plimsoll/base/status.h"
#include "plimsoll/kafka/properties.h"

namespace plimsoll::kafka {

// Never renumber: kinds index the topic table and name counters.
enum class EventKind : int { kFlag = 0, kAlert = 1, kModelChange = 2, kDeadLetter = 3, kStateSnapshot = 4 };
inline constexpr int kEventKinds = 5;
std::string_view EventKindName(EventKind kind);  // "flag", "alert", "model_change", ...

// What Publish does when the queue holds queue_capacity events.
enum class OverflowPolicy {
  kReportBusy,        // return Busy at once (default): the caller keeps the event and pauses input
  kBlockWithTimeout,  // wait up to block_timeout_ms for room, then Busy
  kDropOldest,        // discard the oldest queued event, count it (dropped_oldest), accept the new one
};

struct KafkaSinkOptions {
  std::string bootstrap_servers;  // required unless `properties` carries bootstrap.servers
  Properties properties;          // over ProducerDefaults(); librdkafka's own names; consumer-only keys dropped (ForRole)
  // Topic per EventKind (index = kind). An empty name disables that kind (counted as disabled).
  std::array<std::string, kEventKinds> topics = {"plimsoll.flags", "plimsoll.alerts", "plimsoll.models",
                                                 "plimsoll.dead-letters", "plimsoll.state"};
  // Events queued before librdkafka. Larger rides out longer broker stalls; costs memory
  // (about the JSON size per event).
  size_t queue_capacity = 10000;
  OverflowPolicy overflow = OverflowPolicy::kReportBusy;
  int block_timeout_ms = 100;      // kBlockWithTimeout only
  int max_redeliveries = 3;        // re-queues after a failed delivery report (librdkafka retried already)
  int close_timeout_ms = 10000;    // destructor: drain + flush limit
};

struct KafkaSinkCounters {
  int64_t accepted = 0;           // Publish calls that queued an event
  int64_t delivered = 0;          // delivery reports without error
  int64_t delivery_failures = 0;  // delivery reports with an error
  int64_t redeliveries = 0;       // failed events queued again
  int64_t lost = 0;               // failed after max_redeliveries (logged)
  int64_t rejected_busy = 0;      // Publish returned Busy
  int64_t dropped_oldest = 0;     // kDropOldest discards
  int64_t disabled = 0;           // events of a kind whose topic is empty
  int64_t queue_depth = 0;        // gauge: queued, not yet handed to librdkafka
  int64_t in_flight = 0;          // gauge: in librdkafka awaiting a delivery report
};

class KafkaSink {
 public:
  // Validates options (InvalidArgument naming the field or property), starts the producer and its
  // thread. Does not wait for the broker.
  static Result<std::unique_ptr<KafkaSink>> Create(KafkaSinkOptions options);
  // Stops accepting, drains and flushes for at most close_timeout_ms, then stops the thread.
  ~KafkaSink();
  KafkaSink(const KafkaSink&) = delete;
  KafkaSink& operator=(const KafkaSink&) = delete;

  // Queues one event (`json` copied). `key` is the series id (empty: no key). OK when queued or
  // when the kind is disabled; Busy on overflow under kReportBusy/kBlockWithTimeout; Aborted
  // after a fatal producer error or once shutdown began.
  Status Publish(EventKind kind, std::string_view key, std::string_view json);
  // Waits until every accepted event has a delivery report (or was lost), at most timeout_ms.
  // Unavailable naming what is still pending on timeout.
  Status Flush(int timeout_ms);
  KafkaSinkCounters Counters() const;

 private:
  struct Impl;
  explicit KafkaSink(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

}  // namespace plimsoll::kafka
