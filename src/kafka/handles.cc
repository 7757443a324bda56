#include "plimsoll/kafka/handles.h"

#include <spdlog/spdlog.h>

#include <chrono>
#include <string>

namespace plimsoll::kafka {
namespace {

StatusCode CodeFor(rd_kafka_resp_err_t err) {
  switch (err) {
    case RD_KAFKA_RESP_ERR_NO_ERROR:
      return StatusCode::kOk;
    case RD_KAFKA_RESP_ERR__TRANSPORT:
    case RD_KAFKA_RESP_ERR__ALL_BROKERS_DOWN:
    case RD_KAFKA_RESP_ERR__RESOLVE:
    case RD_KAFKA_RESP_ERR__TIMED_OUT:
    case RD_KAFKA_RESP_ERR__TIMED_OUT_QUEUE:
    case RD_KAFKA_RESP_ERR__MSG_TIMED_OUT:
    case RD_KAFKA_RESP_ERR__WAIT_COORD:
    case RD_KAFKA_RESP_ERR__UNKNOWN_BROKER:
    case RD_KAFKA_RESP_ERR_REQUEST_TIMED_OUT:
    case RD_KAFKA_RESP_ERR_LEADER_NOT_AVAILABLE:
    case RD_KAFKA_RESP_ERR_NOT_LEADER_FOR_PARTITION:
    case RD_KAFKA_RESP_ERR_BROKER_NOT_AVAILABLE:
    case RD_KAFKA_RESP_ERR_REPLICA_NOT_AVAILABLE:
    case RD_KAFKA_RESP_ERR_NETWORK_EXCEPTION:
    case RD_KAFKA_RESP_ERR_COORDINATOR_LOAD_IN_PROGRESS:
    case RD_KAFKA_RESP_ERR_COORDINATOR_NOT_AVAILABLE:
    case RD_KAFKA_RESP_ERR_NOT_COORDINATOR:
    case RD_KAFKA_RESP_ERR_NOT_ENOUGH_REPLICAS:
    case RD_KAFKA_RESP_ERR_NOT_ENOUGH_REPLICAS_AFTER_APPEND:
    case RD_KAFKA_RESP_ERR_REBALANCE_IN_PROGRESS:
    case RD_KAFKA_RESP_ERR_KAFKA_STORAGE_ERROR:
    case RD_KAFKA_RESP_ERR_THROTTLING_QUOTA_EXCEEDED:
      return StatusCode::kUnavailable;
    case RD_KAFKA_RESP_ERR__QUEUE_FULL:
    case RD_KAFKA_RESP_ERR__IN_PROGRESS:
    case RD_KAFKA_RESP_ERR__PREV_IN_PROGRESS:
    case RD_KAFKA_RESP_ERR__RETRY:
      return StatusCode::kBusy;
    case RD_KAFKA_RESP_ERR__INVALID_ARG:
    case RD_KAFKA_RESP_ERR__INVALID_TYPE:
    case RD_KAFKA_RESP_ERR__NOT_CONFIGURED:
    case RD_KAFKA_RESP_ERR__CONFLICT:
    case RD_KAFKA_RESP_ERR_INVALID_CONFIG:
    case RD_KAFKA_RESP_ERR_INVALID_GROUP_ID:
    case RD_KAFKA_RESP_ERR_INVALID_SESSION_TIMEOUT:
    case RD_KAFKA_RESP_ERR_INVALID_PARTITIONS:
    case RD_KAFKA_RESP_ERR_INVALID_REPLICATION_FACTOR:
    case RD_KAFKA_RESP_ERR_MSG_SIZE_TOO_LARGE:
    case RD_KAFKA_RESP_ERR_INVALID_MSG_SIZE:
    case RD_KAFKA_RESP_ERR_RECORD_LIST_TOO_LARGE:
    case RD_KAFKA_RESP_ERR_TOPIC_AUTHORIZATION_FAILED:
    case RD_KAFKA_RESP_ERR_GROUP_AUTHORIZATION_FAILED:
    case RD_KAFKA_RESP_ERR_CLUSTER_AUTHORIZATION_FAILED:
      return StatusCode::kInvalidArgument;
    case RD_KAFKA_RESP_ERR__UNKNOWN_PARTITION:
    case RD_KAFKA_RESP_ERR__UNKNOWN_TOPIC:
    case RD_KAFKA_RESP_ERR__UNKNOWN_GROUP:
    case RD_KAFKA_RESP_ERR__NOENT:
    case RD_KAFKA_RESP_ERR__NO_OFFSET:
    case RD_KAFKA_RESP_ERR_UNKNOWN_TOPIC_OR_PART:
    case RD_KAFKA_RESP_ERR_GROUP_ID_NOT_FOUND:
      return StatusCode::kNotFound;
    case RD_KAFKA_RESP_ERR_OFFSET_OUT_OF_RANGE:
    case RD_KAFKA_RESP_ERR__AUTO_OFFSET_RESET:
      return StatusCode::kOutOfRange;
    case RD_KAFKA_RESP_ERR__BAD_MSG:
    case RD_KAFKA_RESP_ERR__BAD_COMPRESSION:
    case RD_KAFKA_RESP_ERR_INVALID_MSG:
    case RD_KAFKA_RESP_ERR_INVALID_RECORD:
      return StatusCode::kCorruption;
    case RD_KAFKA_RESP_ERR__DESTROY:
    case RD_KAFKA_RESP_ERR__FENCED:
    case RD_KAFKA_RESP_ERR__FATAL:
    case RD_KAFKA_RESP_ERR__PURGE_QUEUE:
    case RD_KAFKA_RESP_ERR__PURGE_INFLIGHT:
    case RD_KAFKA_RESP_ERR__ASSIGNMENT_LOST:
    case RD_KAFKA_RESP_ERR_PRODUCER_FENCED:
      return StatusCode::kAborted;
    case RD_KAFKA_RESP_ERR__FS:
      return StatusCode::kIoError;
    default:
      return StatusCode::kInternal;
  }
}

}  // namespace

Status KafkaStatus(rd_kafka_resp_err_t err, std::string_view context) {
  StatusCode code = CodeFor(err);
  if (code == StatusCode::kOk) return Status::Ok();
  std::string message(context);
  if (!message.empty()) message += ": ";
  message += rd_kafka_err2str(err);
  message += " (";
  message += rd_kafka_err2name(err);
  message += ")";
  switch (code) {
    case StatusCode::kUnavailable: return Status::Unavailable(std::move(message));
    case StatusCode::kBusy: return Status::Busy(std::move(message));
    case StatusCode::kInvalidArgument: return Status::InvalidArgument(std::move(message));
    case StatusCode::kNotFound: return Status::NotFound(std::move(message));
    case StatusCode::kOutOfRange: return Status::OutOfRange(std::move(message));
    case StatusCode::kCorruption: return Status::Corruption(std::move(message));
    case StatusCode::kAborted: return Status::Aborted(std::move(message));
    case StatusCode::kIoError: return Status::IoError(std::move(message));
    default: return Status::Internal(std::move(message));
  }
}

KafkaConf& KafkaConf::operator=(KafkaConf&& other) noexcept {
  if (this != &other) {
    if (conf_ != nullptr) rd_kafka_conf_destroy(conf_);
    conf_ = other.conf_;
    other.conf_ = nullptr;
  }
  return *this;
}

Status KafkaConf::Set(std::string_view key, std::string_view value) {
  char errstr[512];
  std::string k(key);
  std::string v(value);
  if (rd_kafka_conf_set(conf_, k.c_str(), v.c_str(), errstr, sizeof(errstr)) != RD_KAFKA_CONF_OK) {
    return Status::InvalidArgument("kafka property '" + k + "' = '" + v + "': " + errstr);
  }
  return Status::Ok();
}

KafkaHandle::KafkaHandle(KafkaHandle&& other) noexcept
    : rk_(other.rk_), type_(other.type_), close_timeout_ms_(other.close_timeout_ms_) {
  other.rk_ = nullptr;
}

KafkaHandle& KafkaHandle::operator=(KafkaHandle&& other) noexcept {
  if (this != &other) {
    IgnoreError(Reset());  // the old handle's close error has nowhere to go from a move
    rk_ = other.rk_;
    type_ = other.type_;
    close_timeout_ms_ = other.close_timeout_ms_;
    other.rk_ = nullptr;
  }
  return *this;
}

Result<KafkaHandle> KafkaHandle::Create(rd_kafka_type_t type, KafkaConf conf, int close_timeout_ms) {
  char errstr[512];
  rd_kafka_t* rk = rd_kafka_new(type, conf.get(), errstr, sizeof(errstr));
  if (rk == nullptr) return Status::InvalidArgument(std::string("cannot create kafka client: ") + errstr);
  conf.Release();  // rd_kafka_new owns the conf once it succeeds
  KafkaHandle handle;
  handle.rk_ = rk;
  handle.type_ = type;
  handle.close_timeout_ms_ = close_timeout_ms;
  return handle;
}

Status KafkaHandle::Reset() {
  if (rk_ == nullptr) return Status::Ok();
  Status status;
  if (type_ == RD_KAFKA_CONSUMER) {
    // Leave the group (the rebalance callback runs here, on this thread). librdkafka bounds the
    // wait itself (at most session.timeout.ms with an unreachable coordinator); the queue-based
    // close with our own deadline left broker references behind in 2.0.2 and hung destroy.
    auto start = std::chrono::steady_clock::now();
    status = KafkaStatus(rd_kafka_consumer_close(rk_), "consumer close");
    auto took = std::chrono::duration_cast<std::chrono::milliseconds>(std::chrono::steady_clock::now() - start);
    if (took.count() > close_timeout_ms_) {
      spdlog::warn("kafka: consumer close took {} ms (limit {} ms)", took.count(), close_timeout_ms_);
    }
    rd_kafka_destroy(rk_);
  } else {
    rd_kafka_resp_err_t err = rd_kafka_flush(rk_, close_timeout_ms_);
    if (err != RD_KAFKA_RESP_ERR_NO_ERROR) {
      status = KafkaStatus(err, std::to_string(rd_kafka_outq_len(rk_)) +
                                    " messages still queued after flushing for " +
                                    std::to_string(close_timeout_ms_) + " ms");
      spdlog::warn("kafka: {}", status.message());
      rd_kafka_purge(rk_, RD_KAFKA_PURGE_F_QUEUE | RD_KAFKA_PURGE_F_INFLIGHT);
      rd_kafka_poll(rk_, 0);  // deliver the purge reports so counters see them
    }
    rd_kafka_destroy(rk_);
  }
  rk_ = nullptr;
  return status;
}

PartitionList& PartitionList::operator=(PartitionList&& other) noexcept {
  if (this != &other) {
    if (list_ != nullptr) rd_kafka_topic_partition_list_destroy(list_);
    list_ = other.list_;
    other.list_ = nullptr;
  }
  return *this;
}

KafkaMessage& KafkaMessage::operator=(KafkaMessage&& other) noexcept {
  if (this != &other) {
    if (message_ != nullptr) rd_kafka_message_destroy(message_);
    message_ = other.message_;
    other.message_ = nullptr;
  }
  return *this;
}

}  // namespace plimsoll::kafka
