#pragma once
// KafkaSource: a RecordSource that reads topics as a member of a consumer group.
//
// Positions: on every (eager) assignment each partition asks the PositionLookup. A stored
// position is used as is. With none stored, the group's committed offset decides: if the group
// has consumed the partition before (another instance's work, whose states we do not hold) the
// partition is HELD: paused, logged, counted, never read, so its series never restart from
// nothing; if the group never consumed it, it starts at Options::fresh_start. Before a revoke
// the PartitionListener flushes (OnRevoke) so the stored positions cover what was returned.
// Kafka offset commits (Acknowledge) are advisory and asynchronous.
//
// Thread-safety: Poll/Acknowledge/Pause/Resume/Streams from one thread (the engine's owner
// thread); callbacks run on it from inside Poll() and the destructor. Counters() may be called
// from any thread.

#include <atomic>
#include <cstdint>
#include <memory>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "plimsoll/base/clock.h"
#include "plimsoll/base/status.h"
#include "plimsoll/kafka/properties.h"
#include "plimsoll/stream/source.h"

namespace plimsoll::kafka {

// Where a partition that the group never consumed starts.
enum class FreshStart { kEarliest, kLatest };

struct KafkaSourceOptions {
  // bootstrap.servers; required unless `properties` carries it.
  std::string bootstrap_servers;
  // group.id; required. One instance per group is the supported shape (see class comment).
  std::string group_id;
  // Topic names, or regular expressions starting with '^' (librdkafka's pattern syntax).
  std::vector<std::string> topics;
  // Passed through to librdkafka over ConsumerDefaults(); librdkafka's own names; producer-only
  // keys dropped (ForRole).
  Properties properties;
  // Start of a partition the group never consumed. Earliest reads what the topic holds.
  FreshStart fresh_start = FreshStart::kEarliest;
  // Time limit for the committed-offset query made on assignment, in ms. Longer rides out a
  // slow coordinator; a timeout holds the partitions (safe) and retries on the next rebalance.
  int committed_query_timeout_ms = 5000;
  // Time limit for leaving the group on shutdown, in ms.
  int close_timeout_ms = 10000;
  // Lag is recomputed at most this often, in ms (from cached watermarks; no broker round trip).
  int lag_interval_ms = 1000;
  // Reads time for the lag interval. Not owned; must outlive the source.
  Clock* clock = SystemClock();
};

// A snapshot of the source's counters. Totals are since construction; gauges are current.
struct KafkaSourceCounters {
  int64_t records = 0;              // records returned by Poll
  int64_t bytes = 0;                // key + payload bytes returned
  int64_t rebalances = 0;           // assignments + revocations handled
  int64_t assigned_partitions = 0;  // gauge
  int64_t paused_partitions = 0;    // gauge: paused by Pause() plus held ones
  int64_t held_partitions = 0;      // gauge: held because another instance consumed them
  int64_t held_total = 0;           // partitions ever held
  int64_t lag = -1;                 // sum over assigned partitions of high watermark - next; -1 unknown
  int64_t transport_errors = 0;     // broker connections lost, all brokers down, timeouts
  int64_t fetch_errors = 0;         // per-partition consume errors (retried by librdkafka)
  int64_t offset_reset_errors = 0;  // stored/committed position outside the log: partition held
  int64_t commit_failures = 0;      // advisory commits refused (e.g. during a rebalance)
  int64_t commits = 0;              // advisory commits that succeeded
  int64_t other_errors = 0;         // any other error event
};

class KafkaSource final : public stream::RecordSource {
 public:
  // Connects and subscribes. `lookup` answers stored positions; `listener` (may be null) is told
  // about assignments and must outlive the source (OnRevoke also runs from the destructor).
  // Fails InvalidArgument for a bad option or property (naming it), Unavailable if librdkafka
  // cannot start. Joining the group happens asynchronously inside Poll().
  static Result<std::unique_ptr<KafkaSource>> Create(KafkaSourceOptions options, stream::PositionLookup lookup,
                                                     stream::PartitionListener* listener);
  ~KafkaSource() override;
  KafkaSource(const KafkaSource&) = delete;
  KafkaSource& operator=(const KafkaSource&) = delete;

  // See RecordSource. Views stay valid until the next Poll(). Never returns Aborted (a group
  // subscription does not end). Fatal errors (librdkafka fatal, lost authorisation) are returned.
  Status Poll(std::vector<stream::RawRecord>& out, size_t max_records, int timeout_ms) override;
  // Grows when partitions are first assigned (inside Poll): re-read it after each Poll.
  std::span<const stream::StreamId> Streams() const override;
  // Commits next offsets asynchronously; failures are counted (commit_failures), not returned.
  // InvalidArgument for a stream that is not a Kafka stream of this source.
  Status Acknowledge(std::span<const stream::SourcePosition> durable) override;
  // Pauses/resumes fetching of an assigned partition. NotFound if not assigned. Resume of a
  // held partition returns InvalidArgument and leaves it paused.
  Status Pause(const stream::StreamId& stream) override;
  Status Resume(const stream::StreamId& stream) override;

  KafkaSourceCounters Counters() const;
  // The StreamId this source uses for a topic partition: {"kafka:" + topic, partition}.
  static stream::StreamId StreamFor(std::string_view topic, int32_t partition);

 private:
  struct Impl;
  explicit KafkaSource(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

}  // namespace plimsoll::kafka
