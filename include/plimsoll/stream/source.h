#pragma once
// RecordSource: where observations come from (stdin, a file, Kafka, the embedded broker).
// Header-only interface: sources live in their own modules (stream for stdin/file, kafka for
// Kafka) and the engine drives them from its owner thread.
//
// Exactly-once effect: every record carries its SourcePosition. The engine stores, in the same
// SQLite transaction as the states a record produced, the position AFTER it (the next offset to
// read). On start (and, for Kafka, on partition assignment) a source resumes from the stored
// position that the PositionLookup returns. Acknowledge() is advisory (Kafka offset commit).
//
// Thread-safety: a source is used by one thread (the engine's owner thread). Callbacks
// (PositionLookup, PartitionListener) are invoked on that same thread from inside Poll().

#include <cstdint>
#include <functional>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "plimsoll/base/status.h"

namespace plimsoll::stream {

// Identifies a resumable stream of records: a file path, "stdin", or a Kafka topic partition.
struct StreamId {
  std::string name;        // "file:/data/x.csv", "stdin", "kafka:calls"
  int32_t partition = 0;   // Kafka partition; 0 for files and stdin
  friend bool operator==(const StreamId&, const StreamId&) = default;
};

struct SourcePosition {
  StreamId stream;
  int64_t next_offset = 0;  // the offset to read next (byte offset for files, Kafka offset)
};

// One raw record as received. Views stay valid until the next Poll() call on the same source.
struct RawRecord {
  std::string_view key;      // Kafka key (may carry the series id); empty for files and stdin
  std::string_view payload;  // JSON object, bare number, or CSV line (no trailing newline)
  int32_t stream_index = 0;  // index into RecordSource::Streams()
  int64_t offset = 0;        // this record's offset; resuming after it means next_offset = offset + 1
                             // for Kafka, and offset + payload length + newline for files
  int64_t next_offset = 0;   // the position to store once this record's effect is durable
  int64_t timestamp_ms = -1; // broker/producer timestamp, -1 when unknown
};

// Returns the stored next offset for a stream, or nullopt when none is stored.
using PositionLookup = std::function<std::optional<int64_t>(const StreamId&)>;

// Told about Kafka partition changes. OnRevoke must make everything consumed from those streams
// durable before returning (the engine flushes its group commit).
class PartitionListener {
 public:
  virtual ~PartitionListener() = default;
  virtual void OnAssign(std::span<const StreamId> streams) = 0;
  virtual void OnRevoke(std::span<const StreamId> streams) = 0;
};

class RecordSource {
 public:
  virtual ~RecordSource() = default;

  // Waits up to `timeout_ms` for records and appends at most `max_records` to `out` (after
  // clearing it). OK with zero records on timeout. Aborted when a finite source (file, stdin)
  // has reached its end and every record has been returned. Transient errors are retried inside
  // and counted; a non-OK, non-Aborted status is fatal for the source.
  virtual Status Poll(std::vector<RawRecord>& out, size_t max_records, int timeout_ms) = 0;

  // The streams this source reads, indexed by RawRecord::stream_index (may grow on assignment).
  virtual std::span<const StreamId> Streams() const = 0;

  // Advisory: the effect of records up to these positions is durable (Kafka offset commit).
  virtual Status Acknowledge(std::span<const SourcePosition> durable) = 0;

  // Stops fetching from / resumes a stream (back-pressure). Sources that cannot pause return OK.
  virtual Status Pause(const StreamId& stream) = 0;
  virtual Status Resume(const StreamId& stream) = 0;

  // Whether every payload Poll returns is followed by at least kRecordPadding (decode.h) readable
  // bytes, as in the line sources' read blocks: the decoder then parses it where it lies instead
  // of copying it into its own padded buffer first.
  virtual bool PayloadsPadded() const { return false; }
};

}  // namespace plimsoll::stream
