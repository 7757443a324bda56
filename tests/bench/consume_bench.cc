// Plain librdkafka consume rate from the embedded broker: the ceiling the pipeline benchmark is
// compared against. Produces N small JSON records first (zstd, so the broker's ~5 MiB per
// partition retention keeps them all), then times a consumer that does no processing.
#include <spdlog/spdlog.h>

#include "bench/bench.h"
#include "bench/kafka_bench_util.h"
#include "plimsoll/kafka/embedded_broker.h"

namespace plimsoll::bench {
namespace {

BenchReport RunConsumeBench(const BenchArgs& args) {
  const int64_t records = args.quick ? 50'000 : 1'000'000;
  const int partitions = 4;
  const std::string topic = "bench.consume";
  BenchReport report;
  auto level = spdlog::get_level();
  spdlog::set_level(spdlog::level::warn);  // keep the broker's start-up lines off the report
  kafka::EmbeddedBrokerOptions options;
  options.topics.push_back({topic, partitions});
  auto broker = kafka::EmbeddedBroker::Start(options);
  spdlog::set_level(level);
  if (!broker.ok()) {
    report.Add("error", broker.status().ToString());
    return report;
  }
  auto produced = ProduceJsonRecords((*broker)->BootstrapServers(), topic, records, 1000);
  if (!produced.ok()) {
    report.Add("error", produced.status().ToString());
    return report;
  }
  auto consumed = MeasurePlainConsume((*broker)->BootstrapServers(), topic, partitions, records);
  if (!consumed.ok()) {
    report.Add("error", consumed.status().ToString());
    return report;
  }
  report.Add("records", consumed->records);
  report.Add("partitions", static_cast<int64_t>(partitions));
  report.Add("record_bytes_avg", static_cast<double>(consumed->bytes) / static_cast<double>(consumed->records));
  report.Add("consume_records_per_s", consumed->records_per_s);
  report.Add("consume_mb_per_s", consumed->mb_per_s);
  report.Add("consume_seconds", consumed->seconds);
  report.Add("produce_records_per_s", static_cast<double>(produced->records) / produced->seconds);
  report.notes.push_back("embedded broker (in-process mock cluster over loopback); producer ran before the consumer");
  return report;
}

PLIMSOLL_BENCH("consume", "plain librdkafka consume rate of small JSON records from the embedded broker",
               RunConsumeBench);

}  // namespace
}  // namespace plimsoll::bench
