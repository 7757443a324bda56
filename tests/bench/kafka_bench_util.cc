#include "bench/kafka_bench_util.h"

#include <chrono>
#include <string>

#include "plimsoll/kafka/handles.h"
#include "plimsoll/kafka/properties.h"

namespace plimsoll::bench {
namespace {

using Clock = std::chrono::steady_clock;

struct DeliveryCount {
  int64_t ok = 0;
  int64_t failed = 0;
  rd_kafka_resp_err_t first_error = RD_KAFKA_RESP_ERR_NO_ERROR;
};

void OnDelivery(rd_kafka_t*, const rd_kafka_message_t* message, void* opaque) {
  auto* count = static_cast<DeliveryCount*>(opaque);
  if (message->err == RD_KAFKA_RESP_ERR_NO_ERROR) {
    ++count->ok;
  } else {
    if (count->failed++ == 0) count->first_error = message->err;
  }
}

Result<kafka::KafkaHandle> MakeClient(rd_kafka_type_t type, const kafka::Properties& properties, void* opaque,
                                      bool delivery_reports) {
  Result<kafka::KafkaConf> conf = kafka::BuildConf(properties);
  if (!conf.ok()) return conf.status();
  rd_kafka_conf_set_opaque(conf->get(), opaque);
  if (delivery_reports) rd_kafka_conf_set_dr_msg_cb(conf->get(), OnDelivery);
  return kafka::KafkaHandle::Create(type, std::move(conf.value()), 10000);
}

}  // namespace

Result<ProduceResult> ProduceJsonRecords(const std::string& bootstrap, const std::string& topic, int64_t records,
                                         int series) {
  DeliveryCount count;
  auto producer = MakeClient(RD_KAFKA_PRODUCER,
                             {{"bootstrap.servers", bootstrap},
                              {"compression.type", "zstd"},
                              {"linger.ms", "20"},
                              {"batch.num.messages", "10000"},
                              {"queue.buffering.max.messages", "500000"},
                              {"partitioner", "murmur2_random"}},
                             &count, true);
  if (!producer.ok()) return producer.status();
  ProduceResult result;
  auto start = Clock::now();
  std::string key, value;
  for (int64_t i = 0; i < records; ++i) {
    key = "s" + std::to_string(i % series);
    value = "{\"series\":\"" + key + "\",\"time\":" + std::to_string(1'700'000'000 + (i / series) * 60) +
            ",\"value\":" + std::to_string(100 + (i * 7919) % 997) + ".25}";
    for (;;) {
      rd_kafka_resp_err_t err = rd_kafka_producev(producer->get(), RD_KAFKA_V_TOPIC(topic.c_str()),
                                                  RD_KAFKA_V_KEY(key.data(), key.size()),
                                                  RD_KAFKA_V_VALUE(value.data(), value.size()),
                                                  RD_KAFKA_V_MSGFLAGS(RD_KAFKA_MSG_F_COPY), RD_KAFKA_V_END);
      if (err == RD_KAFKA_RESP_ERR__QUEUE_FULL) {
        rd_kafka_poll(producer->get(), 5);
        continue;
      }
      PLIMSOLL_RETURN_IF_ERROR(kafka::KafkaStatus(err, "bench produce"));
      break;
    }
    result.bytes += static_cast<int64_t>(key.size() + value.size());
    rd_kafka_poll(producer->get(), 0);
  }
  PLIMSOLL_RETURN_IF_ERROR(kafka::KafkaStatus(rd_kafka_flush(producer->get(), 60000), "bench flush"));
  result.seconds = std::chrono::duration<double>(Clock::now() - start).count();
  if (count.failed != 0) return kafka::KafkaStatus(count.first_error, "bench delivery");
  result.records = count.ok;
  return result;
}

Result<ConsumeResult> MeasurePlainConsume(const std::string& bootstrap, const std::string& topic, int partitions,
                                          int64_t expected, int timeout_ms) {
  auto consumer = MakeClient(RD_KAFKA_CONSUMER,
                             kafka::MergeProperties(kafka::ConsumerDefaults(),
                                                    {{"bootstrap.servers", bootstrap},
                                                     {"group.id", "plimsoll-bench-plain-" + topic}}),
                             nullptr, false);
  if (!consumer.ok()) return consumer.status();
  rd_kafka_poll_set_consumer(consumer->get());
  kafka::PartitionList assignment(partitions);
  for (int p = 0; p < partitions; ++p) assignment.Add(topic.c_str(), p).offset = RD_KAFKA_OFFSET_BEGINNING;
  PLIMSOLL_RETURN_IF_ERROR(kafka::KafkaStatus(rd_kafka_assign(consumer->get(), assignment.get()), "bench assign"));

  ConsumeResult result;
  auto deadline = Clock::now() + std::chrono::milliseconds(timeout_ms);
  Clock::time_point first, last;
  while (result.records < expected && Clock::now() < deadline) {
    rd_kafka_message_t* message = rd_kafka_consumer_poll(consumer->get(), 100);
    if (message == nullptr) {
      // Stalled after the first record: the broker dropped some (retention), no use waiting.
      if (result.records > 0 && Clock::now() - last > std::chrono::seconds(5)) break;
      continue;
    }
    if (message->err == RD_KAFKA_RESP_ERR_NO_ERROR) {
      if (result.records == 0) first = Clock::now();
      ++result.records;
      result.bytes += static_cast<int64_t>(message->key_len + message->len);
      last = Clock::now();
    }
    rd_kafka_message_destroy(message);
  }
  IgnoreError(kafka::KafkaStatus(rd_kafka_assign(consumer->get(), nullptr), ""));  // closing anyway
  if (result.records < expected) {
    return Status::Unavailable("plain consume read " + std::to_string(result.records) + " of " +
                               std::to_string(expected) + " records");
  }
  result.seconds = std::chrono::duration<double>(last - first).count();
  if (result.seconds > 0) {
    result.records_per_s = static_cast<double>(result.records) / result.seconds;
    result.mb_per_s = static_cast<double>(result.bytes) / result.seconds / 1e6;
  }
  return result;
}

}  // namespace plimsoll::bench
