#include "plimsoll/kafka/kafka_source.h"

#include <spdlog/spdlog.h>

#include <algorithm>
#include <map>
#include <string>
#include <unordered_map>
#include <utility>

#include "kafka/log_bridge.h"
#include "plimsoll/kafka/handles.h"

namespace plimsoll::kafka {

namespace {

constexpr std::string_view kStreamPrefix = "kafka:";

struct PartitionState {
  bool assigned = false;
  bool user_paused = false;  // Pause() from the engine (back-pressure)
  bool held = false;         // never read: consumed by another instance, or offset outside the log
  int64_t next_offset = -1;  // after the last record returned; -1 unknown
};

struct TopparKey {
  const rd_kafka_topic_t* topic;
  int32_t partition;
  bool operator==(const TopparKey&) const = default;
};
struct TopparHash {
  size_t operator()(const TopparKey& k) const {
    return std::hash<const void*>()(k.topic) * 31 + static_cast<size_t>(k.partition);
  }
};

}  // namespace

struct KafkaSource::Impl {
  KafkaSourceOptions options;
  stream::PositionLookup lookup;
  stream::PartitionListener* listener = nullptr;

  // Owner before dependants: the messages below reference the handle's internals, so the
  // destructor clears them first and closes the handle explicitly (see ~KafkaSource).
  KafkaHandle consumer;
  std::vector<KafkaMessage> lent;  // messages whose bytes the last Poll's records point into

  std::vector<stream::StreamId> streams;
  std::vector<PartitionState> states;  // parallel to streams
  std::map<std::pair<std::string, int32_t>, int32_t, std::less<>> index_by_name;
  std::unordered_map<TopparKey, int32_t, TopparHash> index_by_toppar;  // cleared on rebalance
  uint64_t rebalance_epoch = 0;
  int64_t next_lag_nanos = 0;
  Status fatal;

  std::atomic<int64_t> records{0}, bytes{0}, rebalances{0}, assigned{0}, paused{0}, held{0},
      held_total{0}, lag{-1}, transport_errors{0}, fetch_errors{0}, offset_reset_errors{0},
      commit_failures{0}, commits{0}, other_errors{0};

  int32_t IndexFor(std::string_view topic, int32_t partition);
  int32_t IndexFor(const rd_kafka_message_t* message);
  void RecountGauges();
  void OnAssign(rd_kafka_topic_partition_list_t* partitions);
  void OnRevoke(rd_kafka_topic_partition_list_t* partitions);
  void Hold(int32_t index, std::string_view why);
  void CountError(rd_kafka_resp_err_t err, const rd_kafka_message_t* message, const char* reason);
  void UpdateLag();
  int32_t FindAssigned(const stream::StreamId& stream, Status& status) const;

  static void RebalanceCallback(rd_kafka_t* rk, rd_kafka_resp_err_t err,
                                rd_kafka_topic_partition_list_t* partitions, void* opaque);
  static void CommitCallback(rd_kafka_t* rk, rd_kafka_resp_err_t err,
                             rd_kafka_topic_partition_list_t* offsets, void* opaque);
  static void ErrorCallback(rd_kafka_t* rk, int err, const char* reason, void* opaque);
};

stream::StreamId KafkaSource::StreamFor(std::string_view topic, int32_t partition) {
  std::string name(kStreamPrefix);
  name += topic;
  return stream::StreamId{std::move(name), partition};
}

int32_t KafkaSource::Impl::IndexFor(std::string_view topic, int32_t partition) {
  auto it = index_by_name.find(std::pair<std::string, int32_t>(std::string(topic), partition));
  if (it != index_by_name.end()) return it->second;
  auto index = static_cast<int32_t>(streams.size());
  streams.push_back(StreamFor(topic, partition));
  states.emplace_back();
  index_by_name.emplace(std::pair<std::string, int32_t>(std::string(topic), partition), index);
  return index;
}

int32_t KafkaSource::Impl::IndexFor(const rd_kafka_message_t* message) {
  TopparKey key{message->rkt, message->partition};
  auto it = index_by_toppar.find(key);
  if (it != index_by_toppar.end()) return it->second;
  int32_t index = IndexFor(rd_kafka_topic_name(message->rkt), message->partition);
  index_by_toppar.emplace(key, index);
  return index;
}

void KafkaSource::Impl::RecountGauges() {
  int64_t a = 0, p = 0, h = 0;
  for (const PartitionState& s : states) {
    if (!s.assigned) continue;
    ++a;
    if (s.user_paused || s.held) ++p;
    if (s.held) ++h;
  }
  assigned = a;
  paused = p;
  held = h;
}

void KafkaSource::Impl::Hold(int32_t index, std::string_view why) {
  PartitionState& state = states[index];
  if (state.held) return;
  state.held = true;
  ++held_total;
  const stream::StreamId& id = streams[index];
  spdlog::warn("kafka: holding partition {}[{}] (paused, not read): {}", id.name, id.partition, why);
  PartitionList list(1);
  list.Add(id.name.c_str() + kStreamPrefix.size(), id.partition);
  rd_kafka_resp_err_t err = rd_kafka_pause_partitions(consumer.get(), list.get());
  if (err != RD_KAFKA_RESP_ERR_NO_ERROR) {
    ++other_errors;
    spdlog::error("kafka: {}", KafkaStatus(err, "pausing held partition " + id.name).ToString());
  }
}

void KafkaSource::Impl::OnAssign(rd_kafka_topic_partition_list_t* partitions) {
  ++rebalances;
  ++rebalance_epoch;
  index_by_toppar.clear();
  PartitionList assignment = PartitionList::CopyOf(partitions);
  std::vector<int32_t> indices(static_cast<size_t>(assignment.size()));
  std::vector<int> unknown;  // positions in `assignment` without a stored position
  for (int i = 0; i < assignment.size(); ++i) {
    rd_kafka_topic_partition_t& tp = assignment[i];
    int32_t index = IndexFor(tp.topic, tp.partition);
    indices[static_cast<size_t>(i)] = index;
    states[index] = PartitionState{};
    states[index].assigned = true;
    std::optional<int64_t> stored = lookup ? lookup(streams[index]) : std::nullopt;
    if (stored.has_value()) {
      tp.offset = *stored;
      states[index].next_offset = *stored;
    } else {
      unknown.push_back(i);
    }
  }

  // Partitions without a stored position: has the group consumed them before?
  std::vector<std::pair<int32_t, std::string>> to_hold;
  if (!unknown.empty()) {
    PartitionList query(static_cast<int>(unknown.size()));
    for (int i : unknown) query.Add(assignment[i].topic, assignment[i].partition);
    rd_kafka_resp_err_t err =
        rd_kafka_committed(consumer.get(), query.get(), options.committed_query_timeout_ms);
    for (size_t j = 0; j < unknown.size(); ++j) {
      rd_kafka_topic_partition_t& tp = assignment[unknown[j]];
      int32_t index = indices[static_cast<size_t>(unknown[j])];
      const rd_kafka_topic_partition_t& committed = query[static_cast<int>(j)];
      rd_kafka_resp_err_t perr = err != RD_KAFKA_RESP_ERR_NO_ERROR ? err : committed.err;
      if (perr != RD_KAFKA_RESP_ERR_NO_ERROR) {
        // Not knowing is treated like "consumed before": safe, and retried on the next rebalance.
        tp.offset = RD_KAFKA_OFFSET_END;
        to_hold.emplace_back(index, KafkaStatus(perr, "cannot read the group's committed offset").ToString());
      } else if (committed.offset >= 0) {
        tp.offset = committed.offset;
        to_hold.emplace_back(index, "the group committed offset " + std::to_string(committed.offset) +
                                        " but no position is stored here, so its series' states are "
                                        "held by another instance (one instance per consumer group)");
      } else {
        tp.offset = options.fresh_start == FreshStart::kEarliest ? RD_KAFKA_OFFSET_BEGINNING : RD_KAFKA_OFFSET_END;
        spdlog::info("kafka: partition {}[{}] never consumed by group '{}': starting at {}", streams[index].name,
                     streams[index].partition, options.group_id,
                     options.fresh_start == FreshStart::kEarliest ? "the earliest offset" : "the end");
      }
    }
  }

  rd_kafka_resp_err_t err = rd_kafka_assign(consumer.get(), assignment.get());
  if (err != RD_KAFKA_RESP_ERR_NO_ERROR) {
    ++other_errors;
    spdlog::error("kafka: {}", KafkaStatus(err, "assign").ToString());
  }
  for (const auto& [index, why] : to_hold) Hold(index, why);
  RecountGauges();
  spdlog::info("kafka: assigned {} partition(s), {} held", assignment.size(), to_hold.size());

  if (listener != nullptr) {
    std::vector<stream::StreamId> readable;
    for (int32_t index : indices) {
      if (!states[index].held) readable.push_back(streams[index]);
    }
    listener->OnAssign(readable);
  }
}

void KafkaSource::Impl::OnRevoke(rd_kafka_topic_partition_list_t* partitions) {
  ++rebalances;
  ++rebalance_epoch;
  std::vector<stream::StreamId> flushed;
  std::vector<int32_t> indices;
  for (int i = 0; i < partitions->cnt; ++i) {
    int32_t index = IndexFor(partitions->elems[i].topic, partitions->elems[i].partition);
    indices.push_back(index);
    if (!states[index].held) flushed.push_back(streams[index]);
  }
  // The engine makes everything it has from these partitions durable before we let go.
  if (listener != nullptr) listener->OnRevoke(flushed);
  rd_kafka_resp_err_t err = rd_kafka_assign(consumer.get(), nullptr);
  if (err != RD_KAFKA_RESP_ERR_NO_ERROR) {
    ++other_errors;
    spdlog::error("kafka: {}", KafkaStatus(err, "unassign").ToString());
  }
  for (int32_t index : indices) states[index] = PartitionState{};
  index_by_toppar.clear();
  RecountGauges();
  spdlog::info("kafka: revoked {} partition(s)", partitions->cnt);
}

void KafkaSource::Impl::RebalanceCallback(rd_kafka_t* rk, rd_kafka_resp_err_t err,
                                          rd_kafka_topic_partition_list_t* partitions, void* opaque) {
  auto* impl = static_cast<Impl*>(opaque);
  if (err == RD_KAFKA_RESP_ERR__ASSIGN_PARTITIONS) {
    impl->OnAssign(partitions);
  } else if (err == RD_KAFKA_RESP_ERR__REVOKE_PARTITIONS) {
    impl->OnRevoke(partitions);
  } else {
    ++impl->other_errors;
    spdlog::error("kafka: {}", KafkaStatus(err, "rebalance").ToString());
    impl->OnRevoke(partitions);
    IgnoreError(KafkaStatus(rd_kafka_assign(rk, nullptr), ""));  // counted above
  }
}

void KafkaSource::Impl::CommitCallback(rd_kafka_t*, rd_kafka_resp_err_t err, rd_kafka_topic_partition_list_t* offsets,
                                       void* opaque) {
  auto* impl = static_cast<Impl*>(opaque);
  bool failed = err != RD_KAFKA_RESP_ERR_NO_ERROR && err != RD_KAFKA_RESP_ERR__NO_OFFSET;
  for (int i = 0; !failed && offsets != nullptr && i < offsets->cnt; ++i) {
    if (offsets->elems[i].err != RD_KAFKA_RESP_ERR_NO_ERROR) {
      failed = true;
      err = offsets->elems[i].err;
    }
  }
  if (failed) {
    int64_t n = ++impl->commit_failures;
    if (internal::ShouldLog(n)) {
      spdlog::warn("kafka: advisory offset commit failed ({} so far; positions are stored locally): {}", n,
                   KafkaStatus(err, "commit").message());
    }
  } else {
    ++impl->commits;
  }
}

void KafkaSource::Impl::CountError(rd_kafka_resp_err_t err, const rd_kafka_message_t* message, const char* reason) {
  std::atomic<int64_t>* counter = &other_errors;
  if (internal::IsTransportError(err)) {
    counter = &transport_errors;
  } else if (message != nullptr && message->rkt != nullptr) {
    counter = &fetch_errors;
  }
  int64_t n = ++*counter;
  if (internal::ShouldLog(n)) {
    std::string where;
    if (message != nullptr && message->rkt != nullptr) {
      where = std::string(" on ") + rd_kafka_topic_name(message->rkt) + "[" + std::to_string(message->partition) + "]";
    }
    spdlog::warn("kafka: consumer error{} (#{} of its kind; librdkafka retries): {}", where, n,
                 KafkaStatus(err, reason != nullptr ? reason : "").message());
  }
}

void KafkaSource::Impl::ErrorCallback(rd_kafka_t* rk, int err, const char* reason, void* opaque) {
  auto* impl = static_cast<Impl*>(opaque);
  auto code = static_cast<rd_kafka_resp_err_t>(err);
  if (code == RD_KAFKA_RESP_ERR__FATAL) {
    char text[512];
    rd_kafka_resp_err_t orig = rd_kafka_fatal_error(rk, text, sizeof(text));
    impl->fatal = KafkaStatus(orig, std::string("fatal consumer error: ") + text);
    if (impl->fatal.ok()) impl->fatal = Status::Internal(std::string("fatal consumer error: ") + reason);
    return;
  }
  impl->CountError(code, nullptr, reason);
}

void KafkaSource::Impl::UpdateLag() {
  int64_t now = options.clock->MonotonicNanos();
  if (now < next_lag_nanos) return;
  next_lag_nanos = now + static_cast<int64_t>(options.lag_interval_ms) * 1'000'000;
  int64_t total = 0;
  bool known = false;
  for (size_t i = 0; i < streams.size(); ++i) {
    const PartitionState& s = states[i];
    if (!s.assigned || s.held || s.next_offset < 0) continue;
    int64_t low = 0, high = 0;
    std::string topic = streams[i].name.substr(kStreamPrefix.size());
    if (rd_kafka_get_watermark_offsets(consumer.get(), topic.c_str(), streams[i].partition, &low, &high) !=
            RD_KAFKA_RESP_ERR_NO_ERROR ||
        high < 0) {
      continue;
    }
    total += std::max<int64_t>(0, high - s.next_offset);
    known = true;
  }
  lag = known ? total : -1;
}

KafkaSource::KafkaSource(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}

KafkaSource::~KafkaSource() {
  impl_->lent.clear();  // messages must go before the handle that owns their partitions
  Status status = impl_->consumer.Reset();
  if (!status.ok()) spdlog::warn("kafka: closing the consumer: {}", status.ToString());
}

Result<std::unique_ptr<KafkaSource>> KafkaSource::Create(KafkaSourceOptions options, stream::PositionLookup lookup,
                                                         stream::PartitionListener* listener) {
  if (options.topics.empty()) return Status::InvalidArgument("kafka source: no topics to subscribe to");
  for (const std::string& topic : options.topics) {
    if (topic.empty()) return Status::InvalidArgument("kafka source: empty topic name");
  }
  if (options.clock == nullptr) return Status::InvalidArgument("kafka source: clock must not be null");
  if (options.close_timeout_ms < 0 || options.committed_query_timeout_ms <= 0 || options.lag_interval_ms < 0) {
    return Status::InvalidArgument("kafka source: timeouts must be positive");
  }
  Properties overrides = ForRole(options.properties, ClientRole::kConsumer);
  if (!options.bootstrap_servers.empty()) overrides["bootstrap.servers"] = options.bootstrap_servers;
  if (!options.group_id.empty()) overrides["group.id"] = options.group_id;
  Properties properties = MergeProperties(ConsumerDefaults(), overrides);
  if (properties.count("bootstrap.servers") == 0) {
    return Status::InvalidArgument("kafka source: bootstrap servers are not set ('bootstrap.servers')");
  }
  PLIMSOLL_RETURN_IF_ERROR(ValidateProperties(properties, /*consumer=*/true));
  options.group_id = properties["group.id"];

  auto impl = std::make_unique<Impl>();
  impl->options = std::move(options);
  impl->lookup = std::move(lookup);
  impl->listener = listener;

  Result<KafkaConf> conf = BuildConf(properties);
  if (!conf.ok()) return conf.status();
  rd_kafka_conf_t* raw = conf->get();
  rd_kafka_conf_set_opaque(raw, impl.get());
  rd_kafka_conf_set_rebalance_cb(raw, &Impl::RebalanceCallback);
  rd_kafka_conf_set_offset_commit_cb(raw, &Impl::CommitCallback);
  rd_kafka_conf_set_error_cb(raw, &Impl::ErrorCallback);
  internal::InstallLogBridge(raw);

  Result<KafkaHandle> handle =
      KafkaHandle::Create(RD_KAFKA_CONSUMER, std::move(conf.value()), impl->options.close_timeout_ms);
  if (!handle.ok()) return handle.status();
  impl->consumer = std::move(handle.value());
  rd_kafka_poll_set_consumer(impl->consumer.get());

  PartitionList topics(static_cast<int>(impl->options.topics.size()));
  for (const std::string& topic : impl->options.topics) topics.Add(topic.c_str(), RD_KAFKA_PARTITION_UA);
  rd_kafka_resp_err_t err = rd_kafka_subscribe(impl->consumer.get(), topics.get());
  if (err != RD_KAFKA_RESP_ERR_NO_ERROR) return KafkaStatus(err, "subscribe");
  spdlog::info("kafka: consumer group '{}' subscribing to {} topic(s); properties: {}", impl->options.group_id,
               impl->options.topics.size(), DescribeProperties(properties));
  return std::unique_ptr<KafkaSource>(new KafkaSource(std::move(impl)));
}

std::span<const stream::StreamId> KafkaSource::Streams() const { return impl_->streams; }

Status KafkaSource::Poll(std::vector<stream::RawRecord>& out, size_t max_records, int timeout_ms) {
  Impl& impl = *impl_;
  out.clear();
  impl.lent.clear();
  if (!impl.fatal.ok()) return impl.fatal;
  impl.UpdateLag();
  uint64_t epoch = impl.rebalance_epoch;
  int wait = timeout_ms;
  int64_t bytes = 0;
  while (out.size() < max_records) {
    KafkaMessage message(rd_kafka_consumer_poll(impl.consumer.get(), wait));
    if (impl.rebalance_epoch != epoch) {
      // Records collected before a revoke must not reach the engine: it has flushed those
      // partitions already. Whoever owns them next reads them from the stored position.
      std::erase_if(out, [&](const stream::RawRecord& r) { return !impl.states[r.stream_index].assigned; });
      epoch = impl.rebalance_epoch;
    }
    if (!message) break;
    wait = 0;  // after the first record, take only what is already here
    if (message->err != RD_KAFKA_RESP_ERR_NO_ERROR) {
      if (message->err == RD_KAFKA_RESP_ERR__PARTITION_EOF) continue;
      if (message->rkt != nullptr &&
          (message->err == RD_KAFKA_RESP_ERR__AUTO_OFFSET_RESET || message->err == RD_KAFKA_RESP_ERR_OFFSET_OUT_OF_RANGE)) {
        ++impl.offset_reset_errors;
        int32_t index = impl.IndexFor(message.get());
        impl.Hold(index, KafkaStatus(message->err, "the position to read is outside the log (data removed by "
                                                   "retention, or a stored position from another cluster)")
                             .message());
        impl.RecountGauges();
        continue;
      }
      if (rd_kafka_fatal_error(impl.consumer.get(), nullptr, 0) != RD_KAFKA_RESP_ERR_NO_ERROR) {
        impl.fatal = KafkaStatus(message->err, "fatal consumer error");
        return impl.fatal;
      }
      impl.CountError(message->err, message.get(), rd_kafka_message_errstr(message.get()));
      continue;
    }
    int32_t index = impl.IndexFor(message.get());
    PartitionState& state = impl.states[index];
    if (!state.assigned || state.held) continue;  // fetched just before a pause; never handed out
    stream::RawRecord record;
    if (message->key != nullptr) record.key = std::string_view(static_cast<const char*>(message->key), message->key_len);
    if (message->payload != nullptr) {
      record.payload = std::string_view(static_cast<const char*>(message->payload), message->len);
    }
    record.stream_index = index;
    record.offset = message->offset;
    record.next_offset = message->offset + 1;
    rd_kafka_timestamp_type_t type = RD_KAFKA_TIMESTAMP_NOT_AVAILABLE;
    int64_t ts = rd_kafka_message_timestamp(message.get(), &type);
    record.timestamp_ms = type == RD_KAFKA_TIMESTAMP_NOT_AVAILABLE ? -1 : ts;
    state.next_offset = record.next_offset;
    bytes += static_cast<int64_t>(message->key_len + message->len);
    out.push_back(record);
    impl.lent.push_back(std::move(message));
  }
  impl.records += static_cast<int64_t>(out.size());
  impl.bytes += bytes;
  return Status::Ok();
}

int32_t KafkaSource::Impl::FindAssigned(const stream::StreamId& stream, Status& status) const {
  if (!stream.name.starts_with(kStreamPrefix)) {
    status = Status::InvalidArgument("not a kafka stream: '" + stream.name + "'");
    return -1;
  }
  auto it = index_by_name.find(
      std::pair<std::string, int32_t>(stream.name.substr(kStreamPrefix.size()), stream.partition));
  if (it == index_by_name.end() || !states[it->second].assigned) {
    status = Status::NotFound("partition " + stream.name + "[" + std::to_string(stream.partition) +
                              "] is not assigned to this consumer");
    return -1;
  }
  return it->second;
}

Status KafkaSource::Acknowledge(std::span<const stream::SourcePosition> durable) {
  Impl& impl = *impl_;
  PartitionList list(static_cast<int>(durable.size()));
  for (const stream::SourcePosition& position : durable) {
    Status status;
    if (impl.FindAssigned(position.stream, status) < 0) {
      if (status.code() == StatusCode::kInvalidArgument) return status;
      continue;  // revoked meanwhile: its new owner commits from now on
    }
    list.Add(position.stream.name.c_str() + kStreamPrefix.size(), position.stream.partition).offset =
        position.next_offset;
  }
  if (list.size() == 0) return Status::Ok();
  rd_kafka_resp_err_t err = rd_kafka_commit(impl.consumer.get(), list.get(), /*async=*/1);
  if (err != RD_KAFKA_RESP_ERR_NO_ERROR) {
    int64_t n = ++impl.commit_failures;
    if (internal::ShouldLog(n)) spdlog::warn("kafka: {}", KafkaStatus(err, "advisory offset commit").ToString());
  }
  return Status::Ok();
}

Status KafkaSource::Pause(const stream::StreamId& stream) {
  Impl& impl = *impl_;
  Status status;
  int32_t index = impl.FindAssigned(stream, status);
  if (index < 0) return status;
  PartitionState& state = impl.states[index];
  if (!state.user_paused && !state.held) {
    PartitionList list(1);
    list.Add(stream.name.c_str() + kStreamPrefix.size(), stream.partition);
    PLIMSOLL_RETURN_IF_ERROR(KafkaStatus(rd_kafka_pause_partitions(impl.consumer.get(), list.get()), "pause"));
  }
  state.user_paused = true;
  impl.RecountGauges();
  return Status::Ok();
}

Status KafkaSource::Resume(const stream::StreamId& stream) {
  Impl& impl = *impl_;
  Status status;
  int32_t index = impl.FindAssigned(stream, status);
  if (index < 0) return status;
  PartitionState& state = impl.states[index];
  if (state.held) {
    return Status::InvalidArgument("partition " + stream.name + "[" + std::to_string(stream.partition) +
                                   "] is held (consumed by another instance of the group); it stays paused");
  }
  if (state.user_paused) {
    PartitionList list(1);
    list.Add(stream.name.c_str() + kStreamPrefix.size(), stream.partition);
    PLIMSOLL_RETURN_IF_ERROR(KafkaStatus(rd_kafka_resume_partitions(impl.consumer.get(), list.get()), "resume"));
    state.user_paused = false;
    impl.RecountGauges();
  }
  return Status::Ok();
}

KafkaSourceCounters KafkaSource::Counters() const {
  const Impl& impl = *impl_;
  KafkaSourceCounters c;
  c.records = impl.records;
  c.bytes = impl.bytes;
  c.rebalances = impl.rebalances;
  c.assigned_partitions = impl.assigned;
  c.paused_partitions = impl.paused;
  c.held_partitions = impl.held;
  c.held_total = impl.held_total;
  c.lag = impl.lag;
  c.transport_errors = impl.transport_errors;
  c.fetch_errors = impl.fetch_errors;
  c.offset_reset_errors = impl.offset_reset_errors;
  c.commit_failures = impl.commit_failures;
  c.commits = impl.commits;
  c.other_errors = impl.other_errors;
  return c;
}

}  // namespace plimsoll::kafka
