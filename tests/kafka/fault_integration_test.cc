// Fault injection through the embedded broker's mock API: request errors on Fetch, OffsetCommit
// and Produce, and a broker taken down and up again. The source must recover with no record
// lost or repeated, and the faults must show in its counters.
#include <catch2/catch.hpp>

#include <chrono>
#include <set>
#include <thread>

#include "kafka/kafka_test_util.h"
#include "plimsoll/kafka/embedded_broker.h"
#include "plimsoll/kafka/kafka_sink.h"
#include "plimsoll/kafka/kafka_source.h"

namespace plimsoll::kafka {
namespace {

using testing::OwnedRecord;
using testing::TestRecord;

// Kafka protocol API keys (Apache Kafka protocol guide, "Api Keys" table; from memory).
constexpr int16_t kApiProduce = 0;
constexpr int16_t kApiFetch = 1;
constexpr int16_t kApiOffsetCommit = 8;

std::vector<TestRecord> Batch(int partitions, int per_partition, int first_id) {
  std::vector<TestRecord> records;
  int id = first_id;
  for (int i = 0; i < per_partition; ++i) {
    for (int p = 0; p < partitions; ++p) records.push_back({"s" + std::to_string(p), "{\"id\":" + std::to_string(id++) + "}", p});
  }
  return records;
}

void CheckExactlyOnce(const std::vector<OwnedRecord>& got, int expected_ids) {
  std::set<std::string> payloads;
  std::map<int32_t, int64_t> next;
  for (const OwnedRecord& r : got) {
    INFO("partition " << r.partition << " offset " << r.offset);
    CHECK(payloads.insert(r.payload).second);  // no repeats
    CHECK(r.offset == next[r.partition]);      // no gaps, in order
    next[r.partition] = r.offset + 1;
  }
  CHECK(payloads.size() == static_cast<size_t>(expected_ids));
  for (int id = 0; id < expected_ids; ++id) CHECK(payloads.count("{\"id\":" + std::to_string(id) + "}") == 1);
}

TEST_CASE("the source rides out fetch and commit errors and a broker outage without loss or repeats", "[kafka]") {
  const std::string topic = testing::UniqueName("faults");
  EmbeddedBrokerOptions broker_options;
  broker_options.topics.push_back({topic, 3});
  auto broker = EmbeddedBroker::Start(broker_options);
  REQUIRE(broker.ok());
  const std::string bootstrap = (*broker)->BootstrapServers();
  rd_kafka_mock_cluster_t* mock = (*broker)->TEST_Cluster();
  REQUIRE(testing::ProduceAll(bootstrap, topic, Batch(3, 100, 0)).ok());

  KafkaSourceOptions options;
  options.bootstrap_servers = bootstrap;
  options.group_id = "g-faults";
  options.topics = {topic};
  options.properties = testing::FastGroupProperties();
  options.properties["fetch.error.backoff.ms"] = "50";
  options.properties["reconnect.backoff.ms"] = "50";
  options.properties["reconnect.backoff.max.ms"] = "200";
  testing::PositionMap positions;  // what an engine would have made durable
  auto source = KafkaSource::Create(options, testing::LiveLookup(&positions), nullptr);
  REQUIRE(source.ok());
  std::vector<OwnedRecord> all;
  auto take = [&](size_t count, int timeout_ms, int settle_ms) {
    auto got = testing::Drain(**source, count, timeout_ms, settle_ms, &positions);
    REQUIRE(got.ok());
    all.insert(all.end(), got->begin(), got->end());
  };
  take(50, 20000, 0);

  // Fetch errors: answered as partition errors, retried by librdkafka after a back-off.
  rd_kafka_mock_push_request_errors(mock, kApiFetch, 4, RD_KAFKA_RESP_ERR_UNKNOWN,
                                    RD_KAFKA_RESP_ERR_UNKNOWN, RD_KAFKA_RESP_ERR_NOT_LEADER_FOR_PARTITION,
                                    RD_KAFKA_RESP_ERR_UNKNOWN);
  take(150, 20000, 300);

  // An advisory commit refused by the broker is counted, not fatal.
  rd_kafka_mock_push_request_errors(mock, kApiOffsetCommit, 1, RD_KAFKA_RESP_ERR_OFFSET_METADATA_TOO_LARGE);
  std::vector<stream::SourcePosition> durable;
  for (const auto& [key, next] : positions) durable.push_back({stream::StreamId{key.first, key.second}, next});
  REQUIRE((*source)->Acknowledge(durable).ok());
  take(0, 0, 500);  // serves the commit callback
  CHECK((*source)->Counters().commit_failures >= 1);

  // The only broker goes down and comes back; meanwhile the source keeps polling.
  REQUIRE(rd_kafka_mock_broker_set_down(mock, 1) == RD_KAFKA_RESP_ERR_NO_ERROR);
  take(0, 0, 2500);
  REQUIRE(rd_kafka_mock_broker_set_up(mock, 1) == RD_KAFKA_RESP_ERR_NO_ERROR);
  REQUIRE(testing::ProduceAll(bootstrap, topic, Batch(3, 30, 300)).ok());
  take(390 - all.size(), 30000, 1000);

  CheckExactlyOnce(all, 390);
  KafkaSourceCounters c = (*source)->Counters();
  INFO("fetch_errors=" << c.fetch_errors << " transport_errors=" << c.transport_errors << " other=" << c.other_errors
                       << " commit_failures=" << c.commit_failures << " rebalances=" << c.rebalances);
  CHECK(c.fetch_errors >= 1);
  CHECK(c.transport_errors >= 1);
  CHECK(c.records == 390);
  CHECK(c.held_partitions == 0);
}

TEST_CASE("sink deliveries survive injected produce errors without duplicates", "[kafka]") {
  const std::string topic = testing::UniqueName("sink-faults");
  EmbeddedBrokerOptions broker_options;
  broker_options.topics.push_back({topic, 2});
  auto broker = EmbeddedBroker::Start(broker_options);
  REQUIRE(broker.ok());
  rd_kafka_mock_push_request_errors((*broker)->TEST_Cluster(), kApiProduce, 3,
                                    RD_KAFKA_RESP_ERR_NOT_ENOUGH_REPLICAS, RD_KAFKA_RESP_ERR_NOT_ENOUGH_REPLICAS,
                                    RD_KAFKA_RESP_ERR_REQUEST_TIMED_OUT);
  KafkaSinkOptions options;
  options.bootstrap_servers = (*broker)->BootstrapServers();
  options.topics[static_cast<int>(EventKind::kFlag)] = topic;
  options.properties["retry.backoff.ms"] = "20";
  auto sink = KafkaSink::Create(options);
  REQUIRE(sink.ok());
  for (int i = 0; i < 100; ++i) {
    REQUIRE((*sink)->Publish(EventKind::kFlag, "series-" + std::to_string(i % 7), "{\"n\":" + std::to_string(i) + "}").ok());
  }
  REQUIRE((*sink)->Flush(20000).ok());
  KafkaSinkCounters sc = (*sink)->Counters();
  CHECK(sc.accepted == 100);
  CHECK(sc.delivered == 100);
  CHECK(sc.lost == 0);

  KafkaSourceOptions source_options;
  source_options.bootstrap_servers = (*broker)->BootstrapServers();
  source_options.group_id = "g-sink-faults";
  source_options.topics = {topic};
  source_options.properties = testing::FastGroupProperties();
  auto source = KafkaSource::Create(source_options, testing::MapLookup({}), nullptr);
  REQUIRE(source.ok());
  auto got = testing::Drain(**source, 100, 20000, 1000);
  REQUIRE(got.ok());
  CHECK(got->size() == 100);  // idempotent producer: retries wrote no duplicates
  std::set<std::string> payloads;
  for (const OwnedRecord& r : *got) payloads.insert(r.payload);
  CHECK(payloads.size() == 100);
}

}  // namespace
}  // namespace plimsoll::kafka
