// KafkaSink: events reach their topics keyed by series; failed deliveries are counted and
// re-queued; overflow follows the configured policy.
#include <catch2/catch.hpp>

#include <set>

#include "kafka/kafka_test_util.h"
#include "plimsoll/kafka/embedded_broker.h"
#include "plimsoll/kafka/kafka_sink.h"
#include "plimsoll/kafka/kafka_source.h"

namespace plimsoll::kafka {
namespace {

// An address nothing listens on: port 1 on loopback refuses connections at once.
constexpr const char* kNoBroker = "127.0.0.1:1";

TEST_CASE("sink events reach their topics keyed by series and are counted as delivered", "[kafka]") {
  EmbeddedBrokerOptions broker_options;
  broker_options.topics = {{"ev-flags", 2}, {"ev-alerts", 1}};
  auto broker = EmbeddedBroker::Start(broker_options);
  REQUIRE(broker.ok());
  KafkaSinkOptions options;
  options.bootstrap_servers = (*broker)->BootstrapServers();
  options.topics = {"ev-flags", "ev-alerts", "", "", ""};
  auto sink = KafkaSink::Create(options);
  REQUIRE(sink.ok());
  for (int i = 0; i < 60; ++i) {
    REQUIRE((*sink)->Publish(EventKind::kFlag, "q" + std::to_string(i % 3), "{\"i\":" + std::to_string(i) + "}").ok());
  }
  REQUIRE((*sink)->Publish(EventKind::kAlert, "q1", "{\"alert\":1}").ok());
  REQUIRE((*sink)->Publish(EventKind::kModelChange, "q1", "{}").ok());  // disabled kind
  REQUIRE((*sink)->Flush(10000).ok());
  KafkaSinkCounters c = (*sink)->Counters();
  CHECK(c.accepted == 61);
  CHECK(c.delivered == 61);
  CHECK(c.disabled == 1);
  CHECK(c.delivery_failures == 0);
  CHECK(c.queue_depth == 0);
  CHECK(c.in_flight == 0);

  KafkaSourceOptions source_options;
  source_options.bootstrap_servers = (*broker)->BootstrapServers();
  source_options.group_id = "g-events";
  source_options.topics = {"ev-flags"};
  source_options.properties = testing::FastGroupProperties();
  auto source = KafkaSource::Create(source_options, testing::MapLookup({}), nullptr);
  REQUIRE(source.ok());
  auto got = testing::Drain(**source, 60, 20000, 500);
  REQUIRE(got.ok());
  REQUIRE(got->size() == 60);
  // One key, one partition; per key the events keep their order.
  std::map<std::string, std::set<int32_t>> partitions_of;
  std::map<std::string, int> last;
  for (const testing::OwnedRecord& r : *got) {
    partitions_of[r.key].insert(r.partition);
    int i = std::stoi(r.payload.substr(5));
    CHECK(i % 3 == std::stoi(r.key.substr(1)));
    if (last.count(r.key) != 0) CHECK(i > last[r.key]);
    last[r.key] = i;
  }
  for (const auto& [key, parts] : partitions_of) CHECK(parts.size() == 1);
}

TEST_CASE("failed deliveries are counted, re-queued, then reported lost", "[kafka]") {
  KafkaSinkOptions options;
  options.bootstrap_servers = kNoBroker;
  options.properties = {{"message.timeout.ms", "300"}};
  options.max_redeliveries = 1;
  options.close_timeout_ms = 100;
  auto sink = KafkaSink::Create(options);
  REQUIRE(sink.ok());
  for (int i = 0; i < 5; ++i) REQUIRE((*sink)->Publish(EventKind::kFlag, "k", "{}").ok());
  REQUIRE((*sink)->Flush(10000).ok());  // done means: every event delivered or given up
  KafkaSinkCounters c = (*sink)->Counters();
  CHECK(c.delivered == 0);
  CHECK(c.delivery_failures == 10);  // two attempts each
  CHECK(c.redeliveries == 5);
  CHECK(c.lost == 5);
}

TEST_CASE("a full sink queue reports busy by default and never drops silently", "[kafka]") {
  KafkaSinkOptions options;
  options.bootstrap_servers = kNoBroker;
  // librdkafka holds one message; the rest wait in our queue of 4.
  options.properties = {{"queue.buffering.max.messages", "1"}, {"message.timeout.ms", "60000"}};
  options.queue_capacity = 4;
  options.close_timeout_ms = 100;
  SECTION("report busy") {
    auto sink = KafkaSink::Create(options);
    REQUIRE(sink.ok());
    int busy = 0;
    for (int i = 0; i < 50; ++i) {
      Status s = (*sink)->Publish(EventKind::kFlag, "k", "{}");
      if (s.code() == StatusCode::kBusy) ++busy;
      else REQUIRE(s.ok());
    }
    KafkaSinkCounters c = (*sink)->Counters();
    CHECK(busy > 0);
    CHECK(c.rejected_busy == busy);
    CHECK(c.accepted + busy == 50);
    CHECK(c.dropped_oldest == 0);
    CHECK((*sink)->Flush(50).code() == StatusCode::kUnavailable);
  }
  SECTION("drop oldest") {
    options.overflow = OverflowPolicy::kDropOldest;
    auto sink = KafkaSink::Create(options);
    REQUIRE(sink.ok());
    for (int i = 0; i < 50; ++i) REQUIRE((*sink)->Publish(EventKind::kFlag, "k", "{}").ok());
    KafkaSinkCounters c = (*sink)->Counters();
    CHECK(c.accepted == 50);
    CHECK(c.dropped_oldest > 0);
    CHECK(c.rejected_busy == 0);
  }
  SECTION("block with timeout") {
    options.overflow = OverflowPolicy::kBlockWithTimeout;
    options.block_timeout_ms = 20;
    auto sink = KafkaSink::Create(options);
    REQUIRE(sink.ok());
    int busy = 0;
    for (int i = 0; i < 50; ++i) {
      if ((*sink)->Publish(EventKind::kFlag, "k", "{}").code() == StatusCode::kBusy) ++busy;
    }
    CHECK(busy > 0);
    CHECK((*sink)->Counters().rejected_busy == busy);
  }
}

}  // namespace
}  // namespace plimsoll::kafka
