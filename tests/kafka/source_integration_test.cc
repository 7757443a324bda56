// KafkaSource against the embedded broker: round trip, resume from stored positions, partitions
// held because the group consumed them elsewhere, odd records, acknowledge and pause.
#include <catch2/catch.hpp>

#include <algorithm>
#include <set>

#include "kafka/kafka_test_util.h"
#include "plimsoll/kafka/embedded_broker.h"
#include "plimsoll/kafka/kafka_source.h"

namespace plimsoll::kafka {
namespace {

using testing::Drain;
using testing::OwnedRecord;
using testing::TestRecord;

std::unique_ptr<EmbeddedBroker> StartBroker(const std::string& topic, int partitions) {
  EmbeddedBrokerOptions options;
  options.topics.push_back({topic, partitions});
  auto broker = EmbeddedBroker::Start(options);
  REQUIRE(broker.ok());
  return std::move(broker.value());
}

KafkaSourceOptions SourceOptions(const EmbeddedBroker& broker, const std::string& topic, const std::string& group) {
  KafkaSourceOptions options;
  options.bootstrap_servers = broker.BootstrapServers();
  options.group_id = group;
  options.topics = {topic};
  options.properties = testing::FastGroupProperties();
  return options;
}

std::vector<TestRecord> Records(int partitions, int per_partition) {
  std::vector<TestRecord> records;
  for (int i = 0; i < per_partition; ++i) {
    for (int p = 0; p < partitions; ++p) {
      records.push_back({"series-" + std::to_string(p), "{\"p\":" + std::to_string(p) + ",\"i\":" + std::to_string(i) + "}", p});
    }
  }
  return records;
}

// (partition, offset) -> record, checking no duplicates on the way.
std::map<std::pair<int32_t, int64_t>, OwnedRecord> ByPosition(const std::vector<OwnedRecord>& records) {
  std::map<std::pair<int32_t, int64_t>, OwnedRecord> by;
  for (const OwnedRecord& r : records) {
    INFO("duplicate at partition " << r.partition << " offset " << r.offset);
    CHECK(by.emplace(std::make_pair(r.partition, r.offset), r).second);
  }
  return by;
}

TEST_CASE("records round-trip through the embedded broker with keys, payloads and offsets", "[kafka]") {
  const std::string topic = testing::UniqueName("roundtrip");
  auto broker = StartBroker(topic, 3);
  auto records = Records(3, 100);
  auto offsets = testing::ProduceAll(broker->BootstrapServers(), topic, records);
  REQUIRE(offsets.ok());

  testing::RecordingListener listener;
  KafkaSourceOptions options = SourceOptions(*broker, topic, "g-roundtrip");
  options.lag_interval_ms = 0;  // recompute on every Poll
  auto source = KafkaSource::Create(options, testing::MapLookup({}), &listener);
  REQUIRE(source.ok());
  auto got = Drain(**source, records.size(), 20000);
  REQUIRE(got.ok());
  REQUIRE(got->size() == records.size());
  auto by = ByPosition(*got);
  for (size_t i = 0; i < records.size(); ++i) {
    const OwnedRecord& r = by.at({records[i].partition, (*offsets)[i]});
    CHECK(r.key == records[i].key);
    CHECK(r.payload == records[i].payload);
    CHECK(r.stream == "kafka:" + topic);
    CHECK(r.next_offset == r.offset + 1);
    CHECK(r.timestamp_ms > 0);
  }
  // Offsets within a partition start at 0 and arrive in order.
  std::map<int32_t, int64_t> expected_next;
  for (const OwnedRecord& r : *got) {
    CHECK(r.offset == expected_next[r.partition]);
    expected_next[r.partition] = r.offset + 1;
  }
  KafkaSourceCounters c = (*source)->Counters();
  CHECK(c.records == 300);
  CHECK(c.assigned_partitions == 3);
  CHECK(c.rebalances >= 1);
  CHECK(c.held_partitions == 0);
  CHECK(c.lag == 0);  // everything produced has been read
  CHECK(c.bytes > 0);
  CHECK(listener.assigned.size() == 3);
}

TEST_CASE("resuming from stored positions yields exactly the remaining records", "[kafka]") {
  const std::string topic = testing::UniqueName("resume");
  auto broker = StartBroker(topic, 2);
  auto records = Records(2, 100);
  REQUIRE(testing::ProduceAll(broker->BootstrapServers(), topic, records).ok());

  auto lookup = testing::MapLookup({{{"kafka:" + topic, 0}, 40}, {{"kafka:" + topic, 1}, 70}});
  auto source = KafkaSource::Create(SourceOptions(*broker, topic, "g-resume"), lookup, nullptr);
  REQUIRE(source.ok());
  auto got = Drain(**source, 60 + 30, 20000);
  REQUIRE(got.ok());
  REQUIRE(got->size() == 90);
  auto by = ByPosition(*got);
  for (int64_t o = 40; o < 100; ++o) CHECK(by.at({0, o}).payload == "{\"p\":0,\"i\":" + std::to_string(o) + "}");
  for (int64_t o = 70; o < 100; ++o) CHECK(by.at({1, o}).payload == "{\"p\":1,\"i\":" + std::to_string(o) + "}");
}

TEST_CASE("a partition the group consumed elsewhere is held and counted while the others flow", "[kafka]") {
  const std::string topic = testing::UniqueName("held");
  auto broker = StartBroker(topic, 3);
  auto records = Records(3, 50);
  REQUIRE(testing::ProduceAll(broker->BootstrapServers(), topic, records).ok());
  // Partition 1: the group committed offset 20 (another instance's work); nothing stored here.
  // Partition 0: stored position 10. Partition 2: never consumed by the group.
  REQUIRE(testing::CommitOffset(broker->BootstrapServers(), "g-held", topic, 1, 20).ok());

  testing::RecordingListener listener;
  auto lookup = testing::MapLookup({{{"kafka:" + topic, 0}, 10}});
  auto source = KafkaSource::Create(SourceOptions(*broker, topic, "g-held"), lookup, &listener);
  REQUIRE(source.ok());
  auto got = Drain(**source, 40 + 50, 20000, 1500);
  REQUIRE(got.ok());
  CHECK(got->size() == 90);
  std::map<int32_t, int> per_partition;
  for (const OwnedRecord& r : *got) ++per_partition[r.partition];
  CHECK(per_partition[0] == 40);
  CHECK(per_partition[1] == 0);
  CHECK(per_partition[2] == 50);

  KafkaSourceCounters c = (*source)->Counters();
  CHECK(c.held_partitions == 1);
  CHECK(c.held_total == 1);
  CHECK(c.paused_partitions == 1);
  CHECK(c.assigned_partitions == 3);
  // The listener only hears about partitions it will receive records from.
  CHECK(listener.assigned.size() == 2);
  CHECK(std::none_of(listener.assigned.begin(), listener.assigned.end(),
                     [](const stream::StreamId& s) { return s.partition == 1; }));
  // The engine cannot resume it by accident.
  Status resumed = (*source)->Resume(KafkaSource::StreamFor(topic, 1));
  CHECK(resumed.code() == StatusCode::kInvalidArgument);
  // The group's committed offset is untouched.
  auto committed = testing::ReadCommitted(broker->BootstrapServers(), "g-held", topic, 1);
  REQUIRE(committed.ok());
  CHECK(*committed == 20);
}

TEST_CASE("a stored position outside the log holds that partition and counts the error", "[kafka]") {
  const std::string topic = testing::UniqueName("outside");
  auto broker = StartBroker(topic, 2);
  REQUIRE(testing::ProduceAll(broker->BootstrapServers(), topic, Records(2, 10)).ok());
  // Partition 0 claims position 1000 of a 10-record log (e.g. a store from another cluster).
  auto lookup = testing::MapLookup({{{"kafka:" + topic, 0}, 1000}, {{"kafka:" + topic, 1}, 0}});
  auto source = KafkaSource::Create(SourceOptions(*broker, topic, "g-outside"), lookup, nullptr);
  REQUIRE(source.ok());
  auto got = Drain(**source, 10, 20000, 1500);
  REQUIRE(got.ok());
  CHECK(got->size() == 10);
  for (const OwnedRecord& r : *got) CHECK(r.partition == 1);
  KafkaSourceCounters c = (*source)->Counters();
  CHECK(c.offset_reset_errors >= 1);
  CHECK(c.held_partitions == 1);
}

TEST_CASE("empty, missing, huge and binary payloads reach the caller as raw records", "[kafka]") {
  const std::string topic = testing::UniqueName("odd");
  auto broker = StartBroker(topic, 1);
  std::string binary("\x00\xff\xfe{\"series\":\x01", 14);
  std::string huge(900 * 1024, 'x');
  std::vector<TestRecord> records = {
      {"a", "{\"series\":\"a\",\"value\":1}", 0},
      {"", "", 0},
      {"tomb", "", 0, /*null_payload=*/true},
      {"big", huge, 0},
      {std::string("\x00k", 2), binary, 0},
      {"b", "{\"series\":\"b\",\"value\":2}", 0},
  };
  REQUIRE(testing::ProduceAll(broker->BootstrapServers(), topic, records).ok());
  auto source = KafkaSource::Create(SourceOptions(*broker, topic, "g-odd"), testing::MapLookup({}), nullptr);
  REQUIRE(source.ok());
  auto got = Drain(**source, records.size(), 20000);
  REQUIRE(got.ok());
  REQUIRE(got->size() == records.size());
  for (size_t i = 0; i < records.size(); ++i) {
    CHECK((*got)[i].key == records[i].key);
    CHECK((*got)[i].payload == records[i].payload);
    CHECK((*got)[i].offset == static_cast<int64_t>(i));
  }
}

TEST_CASE("acknowledge commits the next offsets to the group", "[kafka]") {
  const std::string topic = testing::UniqueName("ack");
  auto broker = StartBroker(topic, 2);
  REQUIRE(testing::ProduceAll(broker->BootstrapServers(), topic, Records(2, 10)).ok());
  auto source = KafkaSource::Create(SourceOptions(*broker, topic, "g-ack"), testing::MapLookup({}), nullptr);
  REQUIRE(source.ok());
  auto got = Drain(**source, 20, 20000, 200);
  REQUIRE(got.ok());
  REQUIRE(got->size() == 20);
  std::vector<stream::SourcePosition> durable = {{KafkaSource::StreamFor(topic, 0), 7},
                                                 {KafkaSource::StreamFor(topic, 1), 10}};
  REQUIRE((*source)->Acknowledge(durable).ok());
  // Serve the commit callback.
  for (int i = 0; i < 50 && (*source)->Counters().commits == 0; ++i) REQUIRE(Drain(**source, 0, 0, 50).ok());
  CHECK((*source)->Counters().commits == 1);
  CHECK((*source)->Counters().commit_failures == 0);
  auto c0 = testing::ReadCommitted(broker->BootstrapServers(), "g-ack", topic, 0);
  auto c1 = testing::ReadCommitted(broker->BootstrapServers(), "g-ack", topic, 1);
  REQUIRE(c0.ok());
  REQUIRE(c1.ok());
  CHECK(*c0 == 7);
  CHECK(*c1 == 10);
  // A stream that is not Kafka's is a caller error.
  std::vector<stream::SourcePosition> wrong = {{stream::StreamId{"file:/x", 0}, 1}};
  CHECK((*source)->Acknowledge(wrong).code() == StatusCode::kInvalidArgument);
}

TEST_CASE("a paused partition delivers nothing until resumed, then continues without a gap", "[kafka]") {
  const std::string topic = testing::UniqueName("pause");
  auto broker = StartBroker(topic, 2);
  REQUIRE(testing::ProduceAll(broker->BootstrapServers(), topic, Records(2, 20)).ok());
  auto source = KafkaSource::Create(SourceOptions(*broker, topic, "g-pause"), testing::MapLookup({}), nullptr);
  REQUIRE(source.ok());
  auto first = Drain(**source, 40, 20000, 200);
  REQUIRE(first.ok());
  REQUIRE(first->size() == 40);

  REQUIRE((*source)->Pause(KafkaSource::StreamFor(topic, 0)).ok());
  CHECK((*source)->Counters().paused_partitions == 1);
  REQUIRE(testing::ProduceAll(broker->BootstrapServers(), topic, Records(2, 5)).ok());
  auto while_paused = Drain(**source, 5, 5000, 1000);
  REQUIRE(while_paused.ok());
  CHECK(while_paused->size() == 5);
  for (const OwnedRecord& r : *while_paused) CHECK(r.partition == 1);

  REQUIRE((*source)->Resume(KafkaSource::StreamFor(topic, 0)).ok());
  CHECK((*source)->Counters().paused_partitions == 0);
  auto after = Drain(**source, 5, 5000, 500);
  REQUIRE(after.ok());
  REQUIRE(after->size() == 5);
  for (size_t i = 0; i < after->size(); ++i) {
    CHECK((*after)[i].partition == 0);
    CHECK((*after)[i].offset == 20 + static_cast<int64_t>(i));
  }
  CHECK((*source)->Pause(KafkaSource::StreamFor(topic, 9)).code() == StatusCode::kNotFound);
}

}  // namespace
}  // namespace plimsoll::kafka
