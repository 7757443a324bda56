#include "cli/sources.h"

#include <spdlog/spdlog.h>

#include <chrono>
#include <cmath>
#include <thread>

#include "plimsoll/kafka/embedded_broker.h"
#include "plimsoll/kafka/events.h"
#include "plimsoll/kafka/kafka_sink.h"
#include "plimsoll/kafka/kafka_source.h"
#include "plimsoll/stream/file_source.h"

namespace plimsoll::cli {
namespace {

// Publishes each durable batch's flags, alerts, model changes and dead letters. A full sink
// queue holds the owner thread (and so the input) until there is room: outputs are never
// dropped for lack of space, only after the sink's own delivery retries fail (counted there).
class KafkaOutputSink final : public stream::OutputSink {
 public:
  explicit KafkaOutputSink(std::unique_ptr<kafka::KafkaSink> sink) : sink_(std::move(sink)) {}

  Status Publish(const store::CommitBatch& durable) override {
    Status worst;
    auto send = [&](kafka::EventKind kind, std::string_view key, const std::string& json) {
      Status s = sink_->Publish(kind, key, json);
      for (int attempt = 0; s.code() == StatusCode::kBusy && attempt < 3000; ++attempt) {
        std::this_thread::sleep_for(std::chrono::milliseconds(10));
        s = sink_->Publish(kind, key, json);
      }
      if (!s.ok()) worst = s;
    };
    for (const store::FlagRecord& f : durable.flags)
      send(kafka::EventKind::kFlag, f.series,
           kafka::EncodeFlag({f.series, f.step, f.time_ms, f.value, f.expected, f.lower, f.upper, f.level, f.form}));
    for (const store::AlertRecord& a : durable.alerts)
      send(kafka::EventKind::kAlert, a.series,
           kafka::EncodeAlert({a.series, a.kind == store::AlertKind::kRaised, a.step, a.time_ms, 0, 0, NAN, NAN}));
    for (const store::ModelRecord& m : durable.models) {
      kafka::ModelChangeEvent e;
      e.series = m.series;
      e.step = m.step;
      e.form = m.spec;
      e.previous_form = m.previous_spec;
      e.reason = m.reason;
      e.aicc = m.aicc;
      e.alpha = m.alpha;
      e.beta = m.beta;
      e.gamma = m.gamma;
      e.phi = m.phi;
      send(kafka::EventKind::kModelChange, m.series, kafka::EncodeModelChange(e));
    }
    for (const store::DeadLetterRecord& d : durable.dead_letters)
      send(kafka::EventKind::kDeadLetter, {},
           kafka::EncodeDeadLetter({d.stream, d.partition, d.offset, static_cast<StatusCode>(d.status_code), d.reason,
                                    {}, d.raw}));
    return worst;
  }

  Status Flush(int timeout_ms) override { return sink_->Flush(timeout_ms); }

 private:
  std::unique_ptr<kafka::KafkaSink> sink_;
};

kafka::Properties ToProperties(const stream::KafkaOptions& options) {
  kafka::Properties out;
  for (const auto& [key, value] : options.properties) out[key] = value;
  return out;
}

}  // namespace

Result<OpenedSource> OpenSource(const stream::Config& config, stream::Daemon& daemon) {
  OpenedSource opened;
  switch (config.source.kind) {
    case stream::SourceKind::kStdin:
      opened.source = std::make_unique<stream::StdinSource>(config.source);
      return opened;
    case stream::SourceKind::kFile: {
      Result<std::unique_ptr<stream::FileSource>> file = stream::FileSource::Open(config.source, daemon.Positions());
      if (!file.ok()) return file.status().WithContext("source.path '" + config.source.path + "'");
      opened.source = std::move(file).value();
      return opened;
    }
    case stream::SourceKind::kKafka:
    case stream::SourceKind::kEmbedded:
      break;
  }
  const stream::KafkaOptions& k = config.source.kafka;
  const stream::SinkOptions& out = config.sink;
  if (config.source.kind == stream::SourceKind::kEmbedded) {
    kafka::EmbeddedBrokerOptions broker_options;
    broker_options.brokers = k.brokers;
    for (const std::string& topic : k.topics)
      if (!topic.empty() && topic[0] != '^') broker_options.topics.push_back({topic, k.partitions});
    for (const std::string& topic : {out.flags_topic, out.alerts_topic, out.models_topic, out.state_topic,
                                     out.dead_letter_topic})
      if (!topic.empty()) broker_options.topics.push_back({topic, k.partitions});
    Result<std::unique_ptr<kafka::EmbeddedBroker>> broker = kafka::EmbeddedBroker::Start(broker_options);
    if (!broker.ok()) return broker.status().WithContext("embedded broker");
    opened.bootstrap = (*broker)->BootstrapServers();
    spdlog::warn("embedded broker at {}: IN MEMORY ONLY, about 5 MiB kept per partition; use source.kind = "
                 "\"kafka\" with a real cluster for data you cannot lose",
                 opened.bootstrap);
    opened.broker = std::shared_ptr<kafka::EmbeddedBroker>(std::move(broker).value());
  }
  kafka::Properties properties = ToProperties(k);
  if (!opened.bootstrap.empty()) properties["bootstrap.servers"] = opened.bootstrap;
  else if (auto it = properties.find("bootstrap.servers"); it != properties.end()) opened.bootstrap = it->second;

  kafka::KafkaSinkOptions sink_options;
  sink_options.properties = properties;
  sink_options.topics = {out.flags_topic, out.alerts_topic, out.models_topic, out.dead_letter_topic, ""};
  sink_options.overflow = kafka::OverflowPolicy::kBlockWithTimeout;
  Result<std::unique_ptr<kafka::KafkaSink>> sink = kafka::KafkaSink::Create(sink_options);
  if (!sink.ok()) return sink.status().WithContext("[sink]");
  opened.sink = std::make_unique<KafkaOutputSink>(std::move(sink).value());

  kafka::KafkaSourceOptions source_options;
  source_options.group_id = k.group;
  source_options.topics = k.topics;
  source_options.properties = properties;
  Result<std::unique_ptr<kafka::KafkaSource>> source =
      kafka::KafkaSource::Create(source_options, daemon.Positions(), daemon.Listener());
  if (!source.ok()) return source.status().WithContext("[source.kafka]");
  opened.source = std::move(source).value();
  return opened;
}

}  // namespace plimsoll::cli
