#pragma once
// EmbeddedBroker: librdkafka's built-in mock cluster, in this process, speaking the Kafka protocol
// over loopback TCP so any Kafka client (kcat included) can connect. For local work, the demo,
// tests and benchmarks. It keeps everything IN MEMORY ONLY: all data is gone when it stops, and
// each partition keeps only about 5 MiB (or 100k batches) and silently drops the oldest beyond
// that. Ports are random on every start: read BootstrapServers() or the address file.
//
// Thread-safety: the broker runs on librdkafka's threads; the methods may be called from any
// thread (the mock API is thread-safe).

#include <librdkafka/rdkafka.h>
#include <librdkafka/rdkafka_mock.h>

#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include "plimsoll/base/status.h"
#include "plimsoll/kafka/handles.h"

namespace plimsoll::kafka {

struct TopicSpec {
  std::string name;
  int partitions = 4;  // >= 1
};

struct EmbeddedBrokerOptions {
  // Brokers in the mock cluster (1..16). More than one lets fault tests take one down while the
  // others keep serving metadata.
  int brokers = 1;
  // Topics created before any client starts (clients naming other topics get 4 partitions).
  std::vector<TopicSpec> topics;
  // When not empty, the bootstrap address is written to this file (one line), replacing it.
  std::string address_file;
};

class EmbeddedBroker {
 public:
  // Starts the cluster and creates the topics. InvalidArgument for bad options (naming them),
  // Unavailable when the cluster cannot start, IoError when the address file cannot be written.
  static Result<std::unique_ptr<EmbeddedBroker>> Start(const EmbeddedBrokerOptions& options);
  ~EmbeddedBroker();  // stops the cluster; connected clients see their brokers go down
  EmbeddedBroker(const EmbeddedBroker&) = delete;
  EmbeddedBroker& operator=(const EmbeddedBroker&) = delete;

  // "127.0.0.1:port,..." for bootstrap.servers.
  const std::string& BootstrapServers() const { return bootstrap_; }
  int BrokerCount() const { return brokers_; }
  // Creates one more topic. InvalidArgument if partitions < 1, else librdkafka's error.
  Status CreateTopic(const TopicSpec& topic);
  // For fault injection in tests: the mock cluster (valid while this object lives).
  rd_kafka_mock_cluster_t* TEST_Cluster() const { return cluster_; }

 private:
  EmbeddedBroker() = default;
  KafkaHandle handle_;  // the dummy producer that hosts the cluster; outlives cluster_
  rd_kafka_mock_cluster_t* cluster_ = nullptr;
  std::string bootstrap_;
  int brokers_ = 0;
};

}  // namespace plimsoll::kafka
