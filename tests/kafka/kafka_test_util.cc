#include "kafka/kafka_test_util.h"

#include <atomic>
#include <chrono>

#include "plimsoll/kafka/handles.h"

namespace plimsoll::kafka::testing {
namespace {

struct Delivery {
  std::vector<int64_t>* offsets;
  rd_kafka_resp_err_t first_error = RD_KAFKA_RESP_ERR_NO_ERROR;
  size_t delivered = 0;
};

void OnDelivery(rd_kafka_t*, const rd_kafka_message_t* message, void* opaque) {
  auto* delivery = static_cast<Delivery*>(opaque);
  auto index = reinterpret_cast<uintptr_t>(message->_private);
  if (message->err != RD_KAFKA_RESP_ERR_NO_ERROR) {
    if (delivery->first_error == RD_KAFKA_RESP_ERR_NO_ERROR) delivery->first_error = message->err;
  } else {
    (*delivery->offsets)[index] = message->offset;
  }
  ++delivery->delivered;
}

Result<KafkaHandle> Client(rd_kafka_type_t type, const Properties& properties, Delivery* delivery) {
  Result<KafkaConf> conf = BuildConf(properties);
  if (!conf.ok()) return conf.status();
  if (delivery != nullptr) {
    rd_kafka_conf_set_opaque(conf->get(), delivery);
    rd_kafka_conf_set_dr_msg_cb(conf->get(), OnDelivery);
  }
  return KafkaHandle::Create(type, std::move(conf.value()), 5000);
}

}  // namespace

Result<std::vector<int64_t>> ProduceAll(const std::string& bootstrap, const std::string& topic,
                                        const std::vector<TestRecord>& records) {
  std::vector<int64_t> offsets(records.size(), -1);
  Delivery delivery{&offsets};
  Result<KafkaHandle> producer = Client(
      RD_KAFKA_PRODUCER, {{"bootstrap.servers", bootstrap}, {"enable.idempotence", "true"}, {"linger.ms", "5"},
                          {"message.max.bytes", "2000000"}},
      &delivery);
  if (!producer.ok()) return producer.status();
  for (size_t i = 0; i < records.size(); ++i) {
    const TestRecord& r = records[i];
    for (;;) {
      rd_kafka_resp_err_t err = rd_kafka_producev(
          producer->get(), RD_KAFKA_V_TOPIC(topic.c_str()), RD_KAFKA_V_PARTITION(r.partition),
          RD_KAFKA_V_KEY(r.key.empty() ? nullptr : r.key.data(), r.key.size()),
          RD_KAFKA_V_VALUE(r.null_payload ? nullptr : const_cast<char*>(r.payload.data()),
                           r.null_payload ? 0 : r.payload.size()),
          RD_KAFKA_V_MSGFLAGS(RD_KAFKA_MSG_F_COPY), RD_KAFKA_V_OPAQUE(reinterpret_cast<void*>(i)), RD_KAFKA_V_END);
      if (err == RD_KAFKA_RESP_ERR__QUEUE_FULL) {
        rd_kafka_poll(producer->get(), 10);
        continue;
      }
      PLIMSOLL_RETURN_IF_ERROR(KafkaStatus(err, "produce"));
      break;
    }
  }
  PLIMSOLL_RETURN_IF_ERROR(KafkaStatus(rd_kafka_flush(producer->get(), 30000), "flush"));
  PLIMSOLL_RETURN_IF_ERROR(KafkaStatus(delivery.first_error, "delivery"));
  if (delivery.delivered != records.size()) return Status::Internal("not every record was reported delivered");
  return offsets;
}

Status CommitOffset(const std::string& bootstrap, const std::string& group, const std::string& topic,
                    int32_t partition, int64_t offset) {
  Result<KafkaHandle> consumer = Client(RD_KAFKA_CONSUMER, {{"bootstrap.servers", bootstrap}, {"group.id", group}}, nullptr);
  if (!consumer.ok()) return consumer.status();
  PartitionList list(1);
  list.Add(topic.c_str(), partition).offset = offset;
  PLIMSOLL_RETURN_IF_ERROR(KafkaStatus(rd_kafka_commit(consumer->get(), list.get(), 0), "commit"));
  return KafkaStatus(list[0].err, "commit partition");
}

Result<int64_t> ReadCommitted(const std::string& bootstrap, const std::string& group, const std::string& topic,
                              int32_t partition) {
  Result<KafkaHandle> consumer = Client(RD_KAFKA_CONSUMER, {{"bootstrap.servers", bootstrap}, {"group.id", group}}, nullptr);
  if (!consumer.ok()) return consumer.status();
  PartitionList list(1);
  list.Add(topic.c_str(), partition);
  PLIMSOLL_RETURN_IF_ERROR(KafkaStatus(rd_kafka_committed(consumer->get(), list.get(), 10000), "committed"));
  PLIMSOLL_RETURN_IF_ERROR(KafkaStatus(list[0].err, "committed partition"));
  return list[0].offset;
}

Properties FastGroupProperties() {
  return {{"session.timeout.ms", "6000"}, {"heartbeat.interval.ms", "1000"}, {"auto.offset.reset", "error"}};
}

Result<std::vector<OwnedRecord>> Drain(stream::RecordSource& source, size_t count, int timeout_ms, int settle_ms,
                                       PositionMap* positions) {
  std::vector<OwnedRecord> all;
  std::vector<stream::RawRecord> batch;
  auto start = std::chrono::steady_clock::now();
  auto elapsed_ms = [&] {
    return std::chrono::duration_cast<std::chrono::milliseconds>(std::chrono::steady_clock::now() - start).count();
  };
  bool settling = false;
  auto settle_start = start;
  for (;;) {
    if (!settling && (all.size() >= count || elapsed_ms() > timeout_ms)) {
      settling = true;
      settle_start = std::chrono::steady_clock::now();
    }
    if (settling && std::chrono::steady_clock::now() - settle_start > std::chrono::milliseconds(settle_ms)) break;
    PLIMSOLL_RETURN_IF_ERROR(source.Poll(batch, 1000, 100));
    auto streams = source.Streams();
    for (const stream::RawRecord& r : batch) {
      all.push_back(OwnedRecord{std::string(r.key), std::string(r.payload), streams[r.stream_index].name,
                                streams[r.stream_index].partition, r.offset, r.next_offset, r.timestamp_ms});
      if (positions != nullptr) (*positions)[{streams[r.stream_index].name, streams[r.stream_index].partition}] = r.next_offset;
    }
  }
  return all;
}

stream::PositionLookup MapLookup(std::map<std::pair<std::string, int32_t>, int64_t> positions) {
  return [positions = std::move(positions)](const stream::StreamId& id) -> std::optional<int64_t> {
    auto it = positions.find({id.name, id.partition});
    if (it == positions.end()) return std::nullopt;
    return it->second;
  };
}

stream::PositionLookup LiveLookup(const PositionMap* positions) {
  return [positions](const stream::StreamId& id) -> std::optional<int64_t> {
    auto it = positions->find({id.name, id.partition});
    if (it == positions->end()) return std::nullopt;
    return it->second;
  };
}

void RecordingListener::OnAssign(std::span<const stream::StreamId> streams) {
  assigned.insert(assigned.end(), streams.begin(), streams.end());
}

void RecordingListener::OnRevoke(std::span<const stream::StreamId> streams) {
  revoked.insert(revoked.end(), streams.begin(), streams.end());
}

std::string UniqueName(const std::string& stem) {
  static std::atomic<int> counter{0};
  return stem + "-" + std::to_string(++counter);
}

}  // namespace plimsoll::kafka::testing
