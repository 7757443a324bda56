#pragma once
// Helpers for the kafka integration tests: a plain producer, a committed-offset writer, and a
// loop that drains a RecordSource into owned copies.

#include <cstdint>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "plimsoll/base/status.h"
#include "plimsoll/kafka/kafka_source.h"
#include "plimsoll/stream/source.h"

namespace plimsoll::kafka::testing {

struct TestRecord {
  std::string key;
  std::string payload;
  int32_t partition = 0;
  bool null_payload = false;  // a tombstone (payload pointer null)
};

// Produces every record synchronously (waits for all delivery reports). Returns the offsets in
// record order, or the first delivery error.
Result<std::vector<int64_t>> ProduceAll(const std::string& bootstrap, const std::string& topic,
                                        const std::vector<TestRecord>& records);

// Writes a committed offset for `group` without joining it (a simple-consumer commit).
Status CommitOffset(const std::string& bootstrap, const std::string& group, const std::string& topic,
                    int32_t partition, int64_t offset);

// Reads the group's committed offset (-1001 when none).
Result<int64_t> ReadCommitted(const std::string& bootstrap, const std::string& group, const std::string& topic,
                              int32_t partition);

// Fast-rejoin consumer settings for the embedded broker, plus auto.offset.reset=error.
Properties FastGroupProperties();

struct OwnedRecord {
  std::string key;
  std::string payload;
  std::string stream;
  int32_t partition = 0;
  int64_t offset = 0;
  int64_t next_offset = 0;
  int64_t timestamp_ms = -1;
};

// Stored positions as the engine would keep them: (stream name, partition) -> next offset.
using PositionMap = std::map<std::pair<std::string, int32_t>, int64_t>;

// Polls until `count` records arrived or `timeout_ms` passed; then polls `settle_ms` more to
// catch anything extra. Returns every record seen (copies); fails on a non-OK Poll. When
// `positions` is given, each received record advances it (an engine that commits at once).
Result<std::vector<OwnedRecord>> Drain(stream::RecordSource& source, size_t count, int timeout_ms, int settle_ms = 500,
                                       PositionMap* positions = nullptr);

// A PositionLookup reading a live map (which must outlive the lookup).
stream::PositionLookup LiveLookup(const PositionMap* positions);

// A PositionLookup over a fixed map keyed by (stream name, partition).
stream::PositionLookup MapLookup(std::map<std::pair<std::string, int32_t>, int64_t> positions);

// Records OnAssign/OnRevoke calls.
class RecordingListener : public stream::PartitionListener {
 public:
  void OnAssign(std::span<const stream::StreamId> streams) override;
  void OnRevoke(std::span<const stream::StreamId> streams) override;
  std::vector<stream::StreamId> assigned;
  std::vector<stream::StreamId> revoked;
};

// A topic name unique within this process run (the mock keeps topics for its lifetime).
std::string UniqueName(const std::string& stem);

}  // namespace plimsoll::kafka::testing
