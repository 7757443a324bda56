#include "plimsoll/kafka/kafka_sink.h"

#include <spdlog/spdlog.h>

#include <atomic>
#include <chrono>
#include <condition_variable>
#include <deque>
#include <mutex>
#include <thread>

#include "kafka/log_bridge.h"
#include "plimsoll/base/thread_name.h"
#include "plimsoll/kafka/handles.h"

namespace plimsoll::kafka {

std::string_view EventKindName(EventKind kind) {
  switch (kind) {
    case EventKind::kFlag: return "flag";
    case EventKind::kAlert: return "alert";
    case EventKind::kModelChange: return "model_change";
    case EventKind::kDeadLetter: return "dead_letter";
    case EventKind::kStateSnapshot: return "state_snapshot";
  }
  return "unknown";
}

namespace {

struct Event {
  EventKind kind;
  std::string key;
  std::string json;
  int attempts = 0;  // deliveries tried so far
};

}  // namespace

struct KafkaSink::Impl {
  KafkaSinkOptions options;
  // Owner before dependants: the producer thread uses `producer`; it is joined first.
  KafkaHandle producer;

  std::mutex mu;                    // guards queue and fatal; stopping is set under it too
  std::condition_variable has_work;  // producer thread waits for events
  std::condition_variable has_room;  // kBlockWithTimeout publishers wait for room
  std::deque<Event> queue;
  std::atomic<bool> stopping{false};
  Status fatal;
  std::thread thread;

  std::atomic<int64_t> accepted{0}, delivered{0}, delivery_failures{0}, redeliveries{0}, lost{0},
      rejected_busy{0}, dropped_oldest{0}, disabled{0}, depth{0}, in_flight{0};

  void Run();
  bool Produce(Event& event);  // false: librdkafka's queue is full, try again later
  static void OnDelivery(rd_kafka_t* rk, const rd_kafka_message_t* message, void* opaque);
};

void KafkaSink::Impl::OnDelivery(rd_kafka_t* rk, const rd_kafka_message_t* message, void* opaque) {
  auto* impl = static_cast<Impl*>(opaque);
  std::unique_ptr<Event> event(static_cast<Event*>(message->_private));
  // Leaves in_flight only after a re-queue has raised depth, so Flush never sees both at zero early.
  struct InFlightRelease {
    std::atomic<int64_t>& count;
    ~InFlightRelease() { --count; }
  } release{impl->in_flight};
  if (message->err == RD_KAFKA_RESP_ERR_NO_ERROR) {
    ++impl->delivered;
    return;
  }
  int64_t failures = ++impl->delivery_failures;
  bool fatal = rd_kafka_fatal_error(rk, nullptr, 0) != RD_KAFKA_RESP_ERR_NO_ERROR;
  bool permanent = message->err == RD_KAFKA_RESP_ERR_MSG_SIZE_TOO_LARGE ||
                   message->err == RD_KAFKA_RESP_ERR_INVALID_MSG_SIZE ||
                   message->err == RD_KAFKA_RESP_ERR_TOPIC_AUTHORIZATION_FAILED ||
                   message->err == RD_KAFKA_RESP_ERR__PURGE_QUEUE || message->err == RD_KAFKA_RESP_ERR__PURGE_INFLIGHT;
  permanent = permanent || impl->stopping;  // past the shutdown deadline nothing is re-queued
  std::string topic = message->rkt != nullptr ? rd_kafka_topic_name(message->rkt) : "?";
  if (!fatal && !permanent && event->attempts <= impl->options.max_redeliveries) {
    ++impl->redeliveries;
    if (internal::ShouldLog(failures)) {
      spdlog::warn("kafka sink: delivery to '{}' failed (attempt {}), queued again: {}", topic, event->attempts,
                   KafkaStatus(message->err, "").message());
    }
    std::lock_guard<std::mutex> lock(impl->mu);
    impl->queue.push_front(std::move(*event));  // accepted events are never dropped for room
    ++impl->depth;
    return;
  }
  int64_t n = ++impl->lost;
  if (internal::ShouldLog(n)) {
    spdlog::error("kafka sink: {} event for key '{}' LOST after {} attempt(s) to '{}' ({} lost so far): {}",
                  EventKindName(event->kind), event->key, event->attempts, topic, n,
                  KafkaStatus(message->err, "").message());
  }
}

bool KafkaSink::Impl::Produce(Event& event) {
  const std::string& topic = options.topics[static_cast<size_t>(event.kind)];
  auto owned = std::make_unique<Event>(std::move(event));
  ++owned->attempts;
  rd_kafka_resp_err_t err = rd_kafka_producev(
      producer.get(), RD_KAFKA_V_TOPIC(topic.c_str()),
      RD_KAFKA_V_KEY(owned->key.empty() ? nullptr : owned->key.data(), owned->key.size()),
      RD_KAFKA_V_VALUE(owned->json.data(), owned->json.size()), RD_KAFKA_V_MSGFLAGS(RD_KAFKA_MSG_F_COPY),
      RD_KAFKA_V_OPAQUE(owned.get()), RD_KAFKA_V_END);
  if (err == RD_KAFKA_RESP_ERR_NO_ERROR) {
    ++in_flight;
    owned.release();  // the delivery report owns it now
    return true;
  }
  --owned->attempts;
  event = std::move(*owned);
  if (err == RD_KAFKA_RESP_ERR__QUEUE_FULL) return false;
  // Rejected before sending (e.g. too large, fatal producer): counted as a failed delivery.
  ++delivery_failures;
  int64_t n = ++lost;
  if (internal::ShouldLog(n)) {
    spdlog::error("kafka sink: {} event for key '{}' LOST, producer refused it: {}", EventKindName(event.kind),
                  event.key, KafkaStatus(err, "produce to '" + topic + "'").message());
  }
  if (rd_kafka_fatal_error(producer.get(), nullptr, 0) != RD_KAFKA_RESP_ERR_NO_ERROR) {
    std::lock_guard<std::mutex> lock(mu);
    fatal = KafkaStatus(err, "kafka sink: fatal producer error");
    if (fatal.ok()) fatal = Status::Aborted("kafka sink: fatal producer error");
  }
  return true;
}

void KafkaSink::Impl::Run() {
  NameThisThread("plimsoll-sink");
  std::deque<Event> batch;
  for (;;) {
    {
      std::unique_lock<std::mutex> lock(mu);
      has_work.wait_for(lock, std::chrono::milliseconds(50), [&] { return !queue.empty() || stopping; });
      if (queue.empty() && stopping && in_flight == 0) return;
      batch.swap(queue);  // `depth` still counts these until librdkafka has them
    }
    if (!batch.empty()) has_room.notify_all();
    while (!batch.empty()) {
      if (stopping) {
        // Past the shutdown deadline: what librdkafka could not take is reported, not dropped silently.
        lost += static_cast<int64_t>(batch.size());
        depth -= static_cast<int64_t>(batch.size());
        spdlog::error("kafka sink: {} event(s) LOST at shutdown (never handed to the producer)", batch.size());
        batch.clear();
        break;
      }
      if (!Produce(batch.front())) {
        rd_kafka_poll(producer.get(), 20);  // librdkafka is full: serve reports, then retry
        continue;
      }
      batch.pop_front();
      --depth;
    }
    rd_kafka_poll(producer.get(), stopping ? 20 : 0);
  }
}

KafkaSink::KafkaSink(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}

KafkaSink::~KafkaSink() {
  Status flushed = Flush(impl_->options.close_timeout_ms);
  if (!flushed.ok()) spdlog::warn("kafka sink: {}", flushed.ToString());
  {
    std::lock_guard<std::mutex> lock(impl_->mu);
    impl_->stopping = true;
  }
  impl_->has_work.notify_all();
  // The thread exits once nothing is in flight; the purge in KafkaHandle::Reset ends stragglers.
  rd_kafka_purge(impl_->producer.get(), RD_KAFKA_PURGE_F_QUEUE | RD_KAFKA_PURGE_F_INFLIGHT);
  impl_->thread.join();
  Status closed = impl_->producer.Reset();
  if (!closed.ok()) spdlog::warn("kafka sink: {}", closed.ToString());
}

Result<std::unique_ptr<KafkaSink>> KafkaSink::Create(KafkaSinkOptions options) {
  if (options.queue_capacity == 0) return Status::InvalidArgument("kafka sink: queue_capacity must be at least 1");
  if (options.block_timeout_ms < 0 || options.close_timeout_ms < 0 || options.max_redeliveries < 0) {
    return Status::InvalidArgument("kafka sink: timeouts and max_redeliveries must not be negative");
  }
  Properties overrides = ForRole(options.properties, ClientRole::kProducer);
  if (!options.bootstrap_servers.empty()) overrides["bootstrap.servers"] = options.bootstrap_servers;
  Properties properties = MergeProperties(ProducerDefaults(), overrides);
  if (properties.count("bootstrap.servers") == 0) {
    return Status::InvalidArgument("kafka sink: bootstrap servers are not set ('bootstrap.servers')");
  }
  PLIMSOLL_RETURN_IF_ERROR(ValidateProperties(properties, /*consumer=*/false));

  auto impl = std::make_unique<Impl>();
  impl->options = std::move(options);
  Result<KafkaConf> conf = BuildConf(properties);
  if (!conf.ok()) return conf.status();
  rd_kafka_conf_set_opaque(conf->get(), impl.get());
  rd_kafka_conf_set_dr_msg_cb(conf->get(), &Impl::OnDelivery);
  internal::InstallLogBridge(conf->get());
  Result<KafkaHandle> handle =
      KafkaHandle::Create(RD_KAFKA_PRODUCER, std::move(conf.value()), impl->options.close_timeout_ms);
  if (!handle.ok()) return handle.status();
  impl->producer = std::move(handle.value());
  Impl* raw = impl.get();
  impl->thread = std::thread([raw] { raw->Run(); });
  spdlog::info("kafka sink: producing to flags='{}' alerts='{}' model_changes='{}' dead_letters='{}' states='{}'; "
               "properties: {}",
               raw->options.topics[0], raw->options.topics[1], raw->options.topics[2], raw->options.topics[3],
               raw->options.topics[4], DescribeProperties(properties));
  return std::unique_ptr<KafkaSink>(new KafkaSink(std::move(impl)));
}

Status KafkaSink::Publish(EventKind kind, std::string_view key, std::string_view json) {
  Impl& impl = *impl_;
  auto index = static_cast<size_t>(kind);
  if (index >= impl.options.topics.size()) return Status::InvalidArgument("kafka sink: unknown event kind");
  if (impl.options.topics[index].empty()) {
    ++impl.disabled;
    return Status::Ok();
  }
  {
    std::unique_lock<std::mutex> lock(impl.mu);
    if (!impl.fatal.ok()) return Status::Aborted(impl.fatal.message());
    if (impl.stopping) return Status::Aborted("kafka sink: shutting down");
    if (impl.queue.size() >= impl.options.queue_capacity) {
      switch (impl.options.overflow) {
        case OverflowPolicy::kReportBusy:
          ++impl.rejected_busy;
          return Status::Busy("kafka sink: queue full (" + std::to_string(impl.queue.size()) +
                              " events); pause input and retry");
        case OverflowPolicy::kBlockWithTimeout:
          if (!impl.has_room.wait_for(lock, std::chrono::milliseconds(impl.options.block_timeout_ms),
                                      [&] { return impl.queue.size() < impl.options.queue_capacity; })) {
            ++impl.rejected_busy;
            return Status::Busy("kafka sink: queue still full after " + std::to_string(impl.options.block_timeout_ms) +
                                " ms; pause input and retry");
          }
          break;
        case OverflowPolicy::kDropOldest: {
          int64_t n = ++impl.dropped_oldest;
          if (internal::ShouldLog(n)) {
            spdlog::warn("kafka sink: queue full, dropped the oldest {} event ({} dropped so far, policy drop-oldest)",
                         EventKindName(impl.queue.front().kind), n);
          }
          impl.queue.pop_front();
          --impl.depth;
          break;
        }
      }
    }
    impl.queue.push_back(Event{kind, std::string(key), std::string(json)});
    ++impl.depth;
    ++impl.accepted;
  }
  impl.has_work.notify_one();
  return Status::Ok();
}

Status KafkaSink::Flush(int timeout_ms) {
  auto deadline = std::chrono::steady_clock::now() + std::chrono::milliseconds(timeout_ms);
  for (;;) {
    int64_t queued = impl_->depth;
    int64_t flying = impl_->in_flight;
    if (queued == 0 && flying == 0) return Status::Ok();
    if (std::chrono::steady_clock::now() >= deadline) {
      return Status::Unavailable("kafka sink: " + std::to_string(queued) + " queued and " + std::to_string(flying) +
                                 " in-flight event(s) still pending after " + std::to_string(timeout_ms) + " ms");
    }
    impl_->has_work.notify_one();
    std::this_thread::sleep_for(std::chrono::milliseconds(5));
  }
}

KafkaSinkCounters KafkaSink::Counters() const {
  const Impl& impl = *impl_;
  KafkaSinkCounters c;
  c.accepted = impl.accepted;
  c.delivered = impl.delivered;
  c.delivery_failures = impl.delivery_failures;
  c.redeliveries = impl.redeliveries;
  c.lost = impl.lost;
  c.rejected_busy = impl.rejected_busy;
  c.dropped_oldest = impl.dropped_oldest;
  c.disabled = impl.disabled;
  c.queue_depth = impl.depth;
  c.in_flight = impl.in_flight;
  return c;
}

}  // namespace plimsoll::kafka
