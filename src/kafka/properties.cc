#include "plimsoll/kafka/properties.h"

#include <librdkafka/rdkafka.h>

#include <cstdio>
#include <cstdlib>
#include <sstream>
#include <string>
#include <utility>

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
      // librdkafka 2.0 stops fetching a partition for a fixed second once its local queue passes
      // either threshold, even if the application drains it meanwhile (2.1 added
      // fetch.queue.backoff.ms). With the default 100k messages a lagging daemon reading small
      // records stalled ~0.5 s at a time (pipeline bench rounds at 0.44-0.49 of plain consume):
      // let the byte bound decide, and make it hold a second or two of small records.
      {"queued.min.messages", "1000000"},
      {"queued.max.messages.kbytes", "131072"},
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

namespace {

// Property name -> role letter ('C' consumer only, 'P' producer only) read once from the table
// librdkafka prints about itself, so the split follows the linked library version. Lines look
// like "group.id   |  C  | range | default | importance | description".
std::map<std::string, char, std::less<>> ReadRoleTable() {
  std::map<std::string, char, std::less<>> roles;
  char* text = nullptr;
  size_t size = 0;
  FILE* memory = open_memstream(&text, &size);
  if (memory == nullptr) return roles;
  rd_kafka_conf_properties_show(memory);
  std::fclose(memory);
  std::istringstream lines(std::string(text, size));
  std::free(text);
  std::string line;
  while (std::getline(lines, line)) {
    const size_t bar = line.find('|');
    if (bar == std::string::npos || bar == 0 || line[0] == ' ' || line[0] == '-') continue;
    const size_t next = line.find('|', bar + 1);
    if (next == std::string::npos) continue;
    const std::string role = line.substr(bar + 1, next - bar - 1);
    const char letter = role.find('C') != std::string::npos ? 'C' : role.find('P') != std::string::npos ? 'P' : '*';
    if (letter == '*') continue;
    std::string name = line.substr(0, bar);
    name.erase(name.find_last_not_of(' ') + 1);
    roles.emplace(std::move(name), letter);
  }
  return roles;
}

}  // namespace

Properties ForRole(const Properties& properties, ClientRole role) {
  static const std::map<std::string, char, std::less<>> kRoles = ReadRoleTable();
  const char other = role == ClientRole::kConsumer ? 'P' : 'C';
  Properties out;
  for (const auto& [key, value] : properties) {
    auto it = kRoles.find(key);
    if (it == kRoles.end() || it->second != other) out.emplace(key, value);
  }
  return out;
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
