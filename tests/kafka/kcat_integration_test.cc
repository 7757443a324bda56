// An external Kafka client (kcat, Debian package) produces a file of records into the embedded
// broker; KafkaSource must read exactly those records.
#include <catch2/catch.hpp>

#include <cstdlib>
#include <fstream>
#include <map>
#include <unistd.h>

#include "kafka/kafka_test_util.h"
#include "plimsoll/kafka/embedded_broker.h"
#include "plimsoll/kafka/kafka_source.h"

namespace plimsoll::kafka {
namespace {

TEST_CASE("records produced by kcat from a file are read exactly once and in key order", "[kafka]") {
  if (std::system("command -v kcat >/dev/null 2>&1") != 0) FAIL("kcat is not installed (Debian package kcat)");
  const std::string topic = testing::UniqueName("kcat");
  EmbeddedBrokerOptions broker_options;
  broker_options.topics.push_back({topic, 4});
  auto broker = EmbeddedBroker::Start(broker_options);
  REQUIRE(broker.ok());

  const std::string file = std::string(PLIMSOLL_BINARY_DIR) + "/kcat-input-" + std::to_string(getpid()) + ".txt";
  std::vector<std::pair<std::string, std::string>> lines;
  {
    std::ofstream out(file);
    for (int i = 0; i < 500; ++i) {
      std::string key = "queue-" + std::to_string(i % 9);
      std::string payload = "{\"series\":\"" + key + "\",\"time\":" + std::to_string(1700000000 + 900 * i) +
                            ",\"value\":" + std::to_string(10 + i % 37) + ".5}";
      out << key << ':' << payload << '\n';
      lines.emplace_back(key, payload);
    }
  }
  const std::string command = "kcat -P -b " + (*broker)->BootstrapServers() + " -t " + topic + " -K: -l " + file;
  INFO(command);
  REQUIRE(std::system(command.c_str()) == 0);
  std::remove(file.c_str());

  KafkaSourceOptions options;
  options.bootstrap_servers = (*broker)->BootstrapServers();
  options.group_id = "g-kcat";
  options.topics = {"^kcat-.*"};  // a pattern subscription
  options.properties = testing::FastGroupProperties();
  options.properties["topic.metadata.refresh.interval.ms"] = "1000";
  auto source = KafkaSource::Create(options, testing::MapLookup({}), nullptr);
  REQUIRE(source.ok());
  auto got = testing::Drain(**source, lines.size(), 30000, 1000);
  REQUIRE(got.ok());
  REQUIRE(got->size() == lines.size());
  // Per key, records arrive in file order (one key -> one partition).
  std::map<std::string, std::vector<std::string>> expected, seen;
  for (const auto& [key, payload] : lines) expected[key].push_back(payload);
  for (const testing::OwnedRecord& r : *got) {
    CHECK(r.stream == "kafka:" + topic);
    seen[r.key].push_back(r.payload);
  }
  CHECK(seen == expected);
}

}  // namespace
}  // namespace plimsoll::kafka
