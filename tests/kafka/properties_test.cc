// Property merging and validation, and the librdkafka error -> Status mapping.
#include <catch2/catch.hpp>

#include "plimsoll/kafka/handles.h"
#include "plimsoll/kafka/properties.h"

namespace plimsoll::kafka {
namespace {

TEST_CASE("user properties override our consumer defaults and add new keys", "[kafka]") {
  Properties merged = MergeProperties(ConsumerDefaults(), {{"session.timeout.ms", "6000"}, {"fetch.min.bytes", "1"}});
  CHECK(merged.at("session.timeout.ms") == "6000");
  CHECK(merged.at("fetch.min.bytes") == "1");
  CHECK(merged.at("enable.auto.commit") == "false");
  CHECK(merged.at("enable.auto.offset.store") == "false");
  CHECK(merged.at("auto.offset.reset") == "error");
  CHECK(merged.at("partition.assignment.strategy") == "range");
  CHECK(ProducerDefaults().at("enable.idempotence") == "true");
}

TEST_CASE("consumer settings that break stored positions are refused with the key named", "[kafka]") {
  Properties ok = MergeProperties(ConsumerDefaults(), {{"group.id", "g"}});
  CHECK(ValidateProperties(ok, true).ok());
  Status auto_commit = ValidateProperties(MergeProperties(ok, {{"enable.auto.commit", "true"}}), true);
  CHECK(auto_commit.code() == StatusCode::kInvalidArgument);
  CHECK(auto_commit.message().find("enable.auto.commit") != std::string::npos);
  CHECK(ValidateProperties(MergeProperties(ok, {{"enable.auto.offset.store", "true"}}), true).code() ==
        StatusCode::kInvalidArgument);
  Status coop = ValidateProperties(MergeProperties(ok, {{"partition.assignment.strategy", "cooperative-sticky"}}), true);
  CHECK(coop.message().find("partition.assignment.strategy") != std::string::npos);
  CHECK(ValidateProperties(ConsumerDefaults(), true).message().find("group.id") != std::string::npos);
  CHECK(ValidateProperties(MergeProperties(ok, {{"partition.assignment.strategy", "roundrobin"}}), true).ok());
}

TEST_CASE("a producer must stay idempotent", "[kafka]") {
  CHECK(ValidateProperties(ProducerDefaults(), false).ok());
  Status s = ValidateProperties(MergeProperties(ProducerDefaults(), {{"enable.idempotence", "false"}}), false);
  CHECK(s.code() == StatusCode::kInvalidArgument);
  CHECK(s.message().find("enable.idempotence") != std::string::npos);
}

TEST_CASE("librdkafka rejects unknown keys and bad values; the error names the key", "[kafka]") {
  CHECK(BuildConf(ConsumerDefaults()).ok());
  auto unknown = BuildConf({{"no.such.property", "1"}});
  REQUIRE_FALSE(unknown.ok());
  CHECK(unknown.status().code() == StatusCode::kInvalidArgument);
  CHECK(unknown.status().message().find("no.such.property") != std::string::npos);
  auto bad = BuildConf({{"session.timeout.ms", "soon"}});
  REQUIRE_FALSE(bad.ok());
  CHECK(bad.status().message().find("session.timeout.ms") != std::string::npos);
}

TEST_CASE("secrets are masked when properties are logged", "[kafka]") {
  std::string text = DescribeProperties({{"sasl.password", "hunter2"}, {"client.id", "x"}});
  CHECK(text == "client.id=x, sasl.password=***");
}

TEST_CASE("librdkafka errors map to status codes by what the caller can do", "[kafka]") {
  CHECK(KafkaStatus(RD_KAFKA_RESP_ERR_NO_ERROR, "x").ok());
  CHECK(KafkaStatus(RD_KAFKA_RESP_ERR__TRANSPORT, "").code() == StatusCode::kUnavailable);
  CHECK(KafkaStatus(RD_KAFKA_RESP_ERR__ALL_BROKERS_DOWN, "").code() == StatusCode::kUnavailable);
  CHECK(KafkaStatus(RD_KAFKA_RESP_ERR_NOT_LEADER_FOR_PARTITION, "").code() == StatusCode::kUnavailable);
  CHECK(KafkaStatus(RD_KAFKA_RESP_ERR__QUEUE_FULL, "").code() == StatusCode::kBusy);
  CHECK(KafkaStatus(RD_KAFKA_RESP_ERR__INVALID_ARG, "").code() == StatusCode::kInvalidArgument);
  CHECK(KafkaStatus(RD_KAFKA_RESP_ERR_MSG_SIZE_TOO_LARGE, "").code() == StatusCode::kInvalidArgument);
  CHECK(KafkaStatus(RD_KAFKA_RESP_ERR_UNKNOWN_TOPIC_OR_PART, "").code() == StatusCode::kNotFound);
  CHECK(KafkaStatus(RD_KAFKA_RESP_ERR_OFFSET_OUT_OF_RANGE, "").code() == StatusCode::kOutOfRange);
  CHECK(KafkaStatus(RD_KAFKA_RESP_ERR__AUTO_OFFSET_RESET, "").code() == StatusCode::kOutOfRange);
  CHECK(KafkaStatus(RD_KAFKA_RESP_ERR__BAD_MSG, "").code() == StatusCode::kCorruption);
  CHECK(KafkaStatus(RD_KAFKA_RESP_ERR__FATAL, "").code() == StatusCode::kAborted);
  CHECK(KafkaStatus(RD_KAFKA_RESP_ERR_UNKNOWN, "").code() == StatusCode::kInternal);
  Status s = KafkaStatus(RD_KAFKA_RESP_ERR__TRANSPORT, "fetch from broker 1");
  CHECK(s.message().rfind("fetch from broker 1: ", 0) == 0);
  CHECK(s.message().find("(_TRANSPORT)") != std::string::npos);
}

TEST_CASE("one pass-through table serves consumer and producer", "[kafka]") {
  // Roles as librdkafka's own property table (rd_kafka_conf_properties_show) states them.
  const Properties shared{{"bootstrap.servers", "127.0.0.1:1"}, {"group.id", "g"}, {"fetch.wait.max.ms", "10"},
                          {"linger.ms", "20"}, {"auto.offset.reset", "earliest"}, {"no.such.key", "x"}};
  const Properties producer = ForRole(shared, ClientRole::kProducer);
  CHECK(producer.count("bootstrap.servers") == 1);
  CHECK(producer.count("linger.ms") == 1);
  CHECK(producer.count("group.id") == 0);
  CHECK(producer.count("fetch.wait.max.ms") == 0);
  CHECK(producer.count("auto.offset.reset") == 0);
  CHECK(producer.count("no.such.key") == 1);  // left for BuildConf to reject by name
  const Properties consumer = ForRole(shared, ClientRole::kConsumer);
  CHECK(consumer.count("group.id") == 1);
  CHECK(consumer.count("fetch.wait.max.ms") == 1);
  CHECK(consumer.count("auto.offset.reset") == 1);
  CHECK(consumer.count("linger.ms") == 0);
  CHECK_FALSE(BuildConf(producer).ok());
  CHECK(BuildConf(ForRole({{"group.id", "g"}, {"linger.ms", "1"}}, ClientRole::kProducer)).ok());
}

}  // namespace
}  // namespace plimsoll::kafka
