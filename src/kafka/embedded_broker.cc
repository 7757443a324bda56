#include "plimsoll/kafka/embedded_broker.h"

#include <spdlog/spdlog.h>

#include <cstdio>
#include <fstream>

#include "kafka/log_bridge.h"

namespace plimsoll::kafka {

Result<std::unique_ptr<EmbeddedBroker>> EmbeddedBroker::Start(const EmbeddedBrokerOptions& options) {
  if (options.brokers < 1 || options.brokers > 16) {
    return Status::InvalidArgument("embedded broker: brokers must be 1..16, got " + std::to_string(options.brokers));
  }
  for (const TopicSpec& topic : options.topics) {
    if (topic.name.empty()) return Status::InvalidArgument("embedded broker: empty topic name");
    if (topic.partitions < 1 || topic.partitions > 10000) {
      return Status::InvalidArgument("embedded broker: topic '" + topic.name + "' needs 1..10000 partitions, got " +
                                     std::to_string(topic.partitions));
    }
  }
  KafkaConf conf;
  // The host handle never connects anywhere; it only owns the mock cluster's threads.
  PLIMSOLL_RETURN_IF_ERROR(conf.Set("client.id", "plimsoll-embedded-broker"));
  PLIMSOLL_RETURN_IF_ERROR(conf.Set("log.connection.close", "false"));
  // Warnings and errors only: at notice level the host handle complains that it has no
  // bootstrap.servers, which is true and harmless.
  PLIMSOLL_RETURN_IF_ERROR(conf.Set("log_level", "4"));
  internal::InstallLogBridge(conf.get());
  Result<KafkaHandle> handle = KafkaHandle::Create(RD_KAFKA_PRODUCER, std::move(conf), /*close_timeout_ms=*/0);
  if (!handle.ok()) return handle.status().WithContext("embedded broker");

  std::unique_ptr<EmbeddedBroker> broker(new EmbeddedBroker());
  broker->handle_ = std::move(handle.value());
  broker->cluster_ = rd_kafka_mock_cluster_new(broker->handle_.get(), options.brokers);
  if (broker->cluster_ == nullptr) return Status::Unavailable("embedded broker: the mock cluster did not start");
  broker->brokers_ = options.brokers;
  broker->bootstrap_ = rd_kafka_mock_cluster_bootstraps(broker->cluster_);
  for (const TopicSpec& topic : options.topics) PLIMSOLL_RETURN_IF_ERROR(broker->CreateTopic(topic));

  if (!options.address_file.empty()) {
    std::string tmp = options.address_file + ".tmp";
    {
      std::ofstream out(tmp, std::ios::trunc);
      out << broker->bootstrap_ << '\n';
      if (!out.flush()) return Status::IoError("embedded broker: cannot write address file '" + tmp + "'");
    }
    if (std::rename(tmp.c_str(), options.address_file.c_str()) != 0) {
      return Status::IoError("embedded broker: cannot write address file '" + options.address_file + "'");
    }
  }
  spdlog::info("embedded broker: {} broker(s) at {} (in memory only: data is lost on exit; about 5 MiB kept per "
               "partition, oldest dropped silently)",
               options.brokers, broker->bootstrap_);
  return broker;
}

Status EmbeddedBroker::CreateTopic(const TopicSpec& topic) {
  if (topic.partitions < 1) {
    return Status::InvalidArgument("embedded broker: topic '" + topic.name + "' needs at least 1 partition");
  }
  int replication = brokers_ < 3 ? brokers_ : 3;
  PLIMSOLL_RETURN_IF_ERROR(KafkaStatus(rd_kafka_mock_topic_create(cluster_, topic.name.c_str(), topic.partitions, replication),
                                       "embedded broker: create topic '" + topic.name + "'"));
  spdlog::info("embedded broker: topic '{}' with {} partition(s)", topic.name, topic.partitions);
  return Status::Ok();
}

EmbeddedBroker::~EmbeddedBroker() {
  if (cluster_ != nullptr) rd_kafka_mock_cluster_destroy(cluster_);
  cluster_ = nullptr;
}

}  // namespace plimsoll::kafka
