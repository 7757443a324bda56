#include "kafka/log_bridge.h"

#include <spdlog/spdlog.h>

namespace plimsoll::kafka::internal {
namespace {

void LogLine(const rd_kafka_t* rk, int level, const char* facility, const char* buf) {
  spdlog::level::level_enum spd_level = spdlog::level::debug;
  if (level <= 3) {
    spd_level = spdlog::level::err;
  } else if (level == 4) {
    spd_level = spdlog::level::warn;
  } else if (level <= 6) {
    spd_level = spdlog::level::info;
  }
  spdlog::log(spd_level, "kafka[{}] {}: {}", rk != nullptr ? rd_kafka_name(rk) : "?", facility, buf);
}

}  // namespace

void InstallLogBridge(rd_kafka_conf_t* conf) { rd_kafka_conf_set_log_cb(conf, LogLine); }

bool IsTransportError(rd_kafka_resp_err_t err) {
  switch (err) {
    case RD_KAFKA_RESP_ERR__TRANSPORT:
    case RD_KAFKA_RESP_ERR__ALL_BROKERS_DOWN:
    case RD_KAFKA_RESP_ERR__RESOLVE:
    case RD_KAFKA_RESP_ERR__TIMED_OUT:
    case RD_KAFKA_RESP_ERR__TIMED_OUT_QUEUE:
    case RD_KAFKA_RESP_ERR_REQUEST_TIMED_OUT:
    case RD_KAFKA_RESP_ERR_NETWORK_EXCEPTION:
    case RD_KAFKA_RESP_ERR_BROKER_NOT_AVAILABLE:
      return true;
    default:
      return false;
  }
}

bool ShouldLog(int64_t count) { return count <= 5 || count % 1000 == 0; }

}  // namespace plimsoll::kafka::internal
