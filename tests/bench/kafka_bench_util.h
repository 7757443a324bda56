#pragma once
// Shared Kafka measurements for benchmarks: fill a topic of the embedded broker with small JSON
// records, and time a plain librdkafka consumer (no processing) reading them back. The pipeline
// benchmark calls the same functions in its own run, so its ratio compares like with like.

#include <cstdint>
#include <string>

#include "plimsoll/base/status.h"

namespace plimsoll::bench {

struct ProduceResult {
  int64_t records = 0;
  int64_t bytes = 0;  // uncompressed key + value bytes
  double seconds = 0;
};

// Produces `records` JSON records {"series":"s<k>","time":<epoch s>,"value":<v>} keyed by series
// (`series` distinct keys) into `topic`, zstd-compressed so the embedded broker's ~5 MiB per
// partition retention holds them; waits for every delivery report. Deterministic content.
Result<ProduceResult> ProduceJsonRecords(const std::string& bootstrap, const std::string& topic, int64_t records,
                                         int series);

struct ConsumeResult {
  int64_t records = 0;
  int64_t bytes = 0;       // key + value bytes handed to the application
  double seconds = 0;      // first record to last record
  double records_per_s = 0;
  double mb_per_s = 0;     // 1e6 bytes per second
};

// Reads `expected` records from every partition of `topic` from the beginning with a plain
// librdkafka consumer (assign, rd_kafka_consumer_poll loop, no processing) and times it from the
// first record to the last. Unavailable if fewer than `expected` arrive within timeout_ms (or
// nothing arrives for 5 s after the first record).
Result<ConsumeResult> MeasurePlainConsume(const std::string& bootstrap, const std::string& topic, int partitions,
                                          int64_t expected, int timeout_ms = 120000);

}  // namespace plimsoll::bench
