#include "plimsoll/kafka/properties.h"

#include <string>

namespace plimsoll::kafka {

Properties ConsumerDefaults() {
  return Properties{
      {"enable.auto.commit", "false"},
      {"enable.auto.offset.store", "false"},
      {"partition.assignment.strategy", "range"},
      {"auto.offset.reset", "error"},
      {"session.timeout.ms", "10000"},
      {"heartbeat.interval.ms", "3000"},
      {"enable.partition.eof", "false"},
      {"client.id", "plimsoll"},
      {"log.connection.close", "false"},
  };
}

Properties ProducerDefaults() {
  return Properties{
      {"enable.idempotence", "true"},
      {"compression.type", "zstd"},
      {"linger.ms", "5"},
      {"partitioner", "murmur2_random"},
      {"message.timeout.ms", "30000"},
      {"queue.buffering.max.messages", "100000"},
      {"client.id", "plimsoll-sink"},
      {"log.connection.close", "false"},
  };
}

Properties MergeProperties(const Properties& defaults, const Properties& overrides) {
  Properties merged = defaults;
  for (const auto& [key, value] : overrides) merged[key] = value;
  return merged;
}

namespace {

bool IsTrue(std::string_view value) { return value == "true" || value == "1"; }

}  // namespace

Status ValidateProperties(const Properties& properties, bool consumer) {
  auto get = [&](std::string_view key) -> std::string_view {
    auto it = properties.find(key);
    return it == properties.end() ? std::string_view() : std::string_view(it->second);
  };
  if (consumer) {
    if (IsTrue(get("enable.auto.commit"))) {
      return Status::InvalidArgument(
          "kafka property 'enable.auto.commit' must be false: positions are stored with the states "
          "and committed to Kafka only after they are durable");
    }
    if (IsTrue(get("enable.auto.offset.store"))) {
      return Status::InvalidArgument(
          "kafka property 'enable.auto.offset.store' must be false: offsets are committed explicitly "
          "after each durable group commit");
    }
    if (get("partition.assignment.strategy").find("cooperative") != std::string_view::npos) {
      return Status::InvalidArgument(
          "kafka property 'partition.assignment.strategy': use 'range' or 'roundrobin'; the source "
          "handles eager rebalances only");
    }
    if (get("group.id").empty()) {
      return Status::InvalidArgument("kafka property 'group.id' must be set for a consumer group");
    }
  } else if (!properties.empty() && properties.count("enable.idempotence") != 0 &&
             !IsTrue(get("enable.idempotence"))) {
    return Status::InvalidArgument(
        "kafka property 'enable.idempotence' must stay true: retries must not duplicate or "
        "reorder events");
  }
  return Status::Ok();
}

Result<KafkaConf> BuildConf(const Properties& properties) {
  KafkaConf conf;
  for (const auto& [key, value] : properties) PLIMSOLL_RETURN_IF_ERROR(conf.Set(key, value));
  return conf;
}

std::string DescribeProperties(const Properties& properties) {
  std::string out;
  for (const auto& [key, value] : properties) {
    if (!out.empty()) out += ", ";
    out += key;
    out += '=';
    bool secret = key.find("password") != std::string::npos || key.find("secret") != std::string::npos ||
                  key.find("jaas") != std::string::npos;
    out += secret ? "***" : value;
  }
  return out;
}

}  // namespace plimsoll::kafka
