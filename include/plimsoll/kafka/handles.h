#pragma once
// RAII owners for librdkafka's C handles, and the one place that turns a librdkafka error code
// into a plimsoll::Status. Every owner is move-only; destructors release with a time limit.
//
// Thread-safety: an owner object is used by one thread at a time; the librdkafka handle it wraps
// is itself thread-safe where librdkafka documents it so.

#include <librdkafka/rdkafka.h>

#include <cstdint>
#include <string_view>

#include "plimsoll/base/status.h"

namespace plimsoll::kafka {

// Maps a librdkafka error to a Status whose message is "<context>: <librdkafka text> (<name>)".
// RD_KAFKA_RESP_ERR_NO_ERROR gives OK. Broker/transport/timeouts -> kUnavailable; queue full ->
// kBusy; bad config/arguments -> kInvalidArgument; unknown topic/partition -> kNotFound;
// offset out of range -> kOutOfRange; corrupt/invalid messages -> kCorruption; destroy/fenced ->
// kAborted; everything else kInternal.
Status KafkaStatus(rd_kafka_resp_err_t err, std::string_view context);

// Owns an rd_kafka_conf_t until it is handed to rd_kafka_new (Release()).
class KafkaConf {
 public:
  KafkaConf() : conf_(rd_kafka_conf_new()) {}
  explicit KafkaConf(rd_kafka_conf_t* conf) : conf_(conf) {}
  ~KafkaConf() { if (conf_ != nullptr) rd_kafka_conf_destroy(conf_); }
  KafkaConf(const KafkaConf&) = delete;
  KafkaConf& operator=(const KafkaConf&) = delete;
  KafkaConf(KafkaConf&& other) noexcept : conf_(other.conf_) { other.conf_ = nullptr; }
  KafkaConf& operator=(KafkaConf&& other) noexcept;

  // Sets one librdkafka property; InvalidArgument naming the key and librdkafka's reason.
  Status Set(std::string_view key, std::string_view value);
  rd_kafka_conf_t* get() const { return conf_; }
  // Gives up ownership (rd_kafka_new takes it on success only; see KafkaHandle::Create).
  rd_kafka_conf_t* Release() { rd_kafka_conf_t* c = conf_; conf_ = nullptr; return c; }

 private:
  rd_kafka_conf_t* conf_;
};

// Owns an rd_kafka_t (producer or consumer). The destructor closes with a time limit: a
// consumer leaves its group (rebalance callbacks run on the destroying thread; librdkafka bounds
// the wait by about session.timeout.ms when the coordinator is gone, and a longer close than
// close_timeout_ms is logged); a producer flushes for at most close_timeout_ms and purges the
// rest (purged messages get failed delivery reports). Then the handle is destroyed.
class KafkaHandle {
 public:
  KafkaHandle() = default;
  ~KafkaHandle() { IgnoreError(Reset()); }  // Reset logs what it could not finish
  KafkaHandle(const KafkaHandle&) = delete;
  KafkaHandle& operator=(const KafkaHandle&) = delete;
  KafkaHandle(KafkaHandle&& other) noexcept;
  KafkaHandle& operator=(KafkaHandle&& other) noexcept;

  // Creates a client of `type` from `conf` (consumed on success and on failure).
  // Fails InvalidArgument with librdkafka's reason (e.g. a property that conflicts).
  static Result<KafkaHandle> Create(rd_kafka_type_t type, KafkaConf conf, int close_timeout_ms);

  rd_kafka_t* get() const { return rk_; }
  explicit operator bool() const { return rk_ != nullptr; }
  // Closes (see class comment) and destroys now; returns the close error, if any. Idempotent.
  Status Reset();

 private:
  rd_kafka_t* rk_ = nullptr;
  rd_kafka_type_t type_ = RD_KAFKA_PRODUCER;
  int close_timeout_ms_ = 0;
};

// Owns an rd_kafka_topic_partition_list_t.
class PartitionList {
 public:
  explicit PartitionList(int capacity = 4) : list_(rd_kafka_topic_partition_list_new(capacity)) {}
  // Takes ownership of `list` (may be null: an empty owner).
  static PartitionList Adopt(rd_kafka_topic_partition_list_t* list) { return PartitionList(list, 0); }
  // Deep copy of a list librdkafka lends us (e.g. inside a rebalance callback).
  static PartitionList CopyOf(const rd_kafka_topic_partition_list_t* list) {
    return Adopt(rd_kafka_topic_partition_list_copy(list));
  }
  ~PartitionList() { if (list_ != nullptr) rd_kafka_topic_partition_list_destroy(list_); }
  PartitionList(const PartitionList&) = delete;
  PartitionList& operator=(const PartitionList&) = delete;
  PartitionList(PartitionList&& other) noexcept : list_(other.list_) { other.list_ = nullptr; }
  PartitionList& operator=(PartitionList&& other) noexcept;

  // Appends (topic, partition) and returns the new element (offset RD_KAFKA_OFFSET_INVALID).
  rd_kafka_topic_partition_t& Add(const char* topic, int32_t partition) {
    return *rd_kafka_topic_partition_list_add(list_, topic, partition);
  }
  int size() const { return list_ == nullptr ? 0 : list_->cnt; }
  rd_kafka_topic_partition_t& operator[](int i) const { return list_->elems[i]; }
  rd_kafka_topic_partition_list_t* get() const { return list_; }

 private:
  PartitionList(rd_kafka_topic_partition_list_t* list, int) : list_(list) {}
  rd_kafka_topic_partition_list_t* list_;
};

// Owns an rd_kafka_message_t returned by a consumer; the key/payload bytes live as long as it.
class KafkaMessage {
 public:
  explicit KafkaMessage(rd_kafka_message_t* message = nullptr) : message_(message) {}
  ~KafkaMessage() { if (message_ != nullptr) rd_kafka_message_destroy(message_); }
  KafkaMessage(const KafkaMessage&) = delete;
  KafkaMessage& operator=(const KafkaMessage&) = delete;
  KafkaMessage(KafkaMessage&& other) noexcept : message_(other.message_) { other.message_ = nullptr; }
  KafkaMessage& operator=(KafkaMessage&& other) noexcept;

  rd_kafka_message_t* get() const { return message_; }
  rd_kafka_message_t* operator->() const { return message_; }
  explicit operator bool() const { return message_ != nullptr; }

 private:
  rd_kafka_message_t* message_;
};

// Owns an rd_kafka_queue_t reference.
class KafkaQueue {
 public:
  explicit KafkaQueue(rd_kafka_queue_t* queue = nullptr) : queue_(queue) {}
  ~KafkaQueue() { if (queue_ != nullptr) rd_kafka_queue_destroy(queue_); }
  KafkaQueue(const KafkaQueue&) = delete;
  KafkaQueue& operator=(const KafkaQueue&) = delete;
  KafkaQueue(KafkaQueue&& other) noexcept : queue_(other.queue_) { other.queue_ = nullptr; }
  KafkaQueue& operator=(KafkaQueue&&) = delete;
  rd_kafka_queue_t* get() const { return queue_; }

 private:
  rd_kafka_queue_t* queue_;
};

}  // namespace plimsoll::kafka
