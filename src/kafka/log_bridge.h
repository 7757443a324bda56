#pragma once
// Routes librdkafka's own log lines and classifies its error events (internal to module kafka).

#include <librdkafka/rdkafka.h>

#include <atomic>
#include <cstdint>
#include <string_view>

namespace plimsoll::kafka::internal {

// Sends librdkafka's log lines to spdlog ("kafka[<client>]: ..."), syslog levels mapped.
void InstallLogBridge(rd_kafka_conf_t* conf);

// True for errors that mean "a broker cannot be reached now" (librdkafka reconnects by itself).
bool IsTransportError(rd_kafka_resp_err_t err);

// Logs the first few occurrences of a kind, then every 1000th, so a flapping broker cannot flood
// the log. `count` is the kind's count after this occurrence.
bool ShouldLog(int64_t count);

}  // namespace plimsoll::kafka::internal
