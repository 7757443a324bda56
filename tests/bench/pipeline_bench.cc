// The full Kafka pipeline against the plain consumer, in one run on the embedded broker:
//  1. N small JSON records (kafka_bench_util.h) are produced once; a plain librdkafka consumer
//     reads them (no processing): consume_records_per_s.
//  2. The daemon (in this process, as `watch` wires it: KafkaSource, decode, engine update + flag,
//     write-behind SQLite group commit with positions in a temp file, KafkaSink outputs) reads the
//     same records. Fitting is kept out of the measurement: forms are fixed (one form), warm-up is
//     20 points, and the clock starts at the first durable commit past a warm-up prefix of 30 steps
//     per series; it stops when all N records are durable: pipeline_records_per_s. A record is
//     durable when the group commit holding its history point (and flag) is: its source position
//     follows at the next checkpoint (every 5 s by default), and a restart re-reads the records
//     after that position with the same results, so counting positions would time the
//     checkpoint interval instead of the pipeline.
//     Steps 1 and 2 alternate over 3 rounds (1 with --quick); the figures are medians over rounds,
//     pipeline_ratio the median of the per-round ratios.
//  3. Latency: a producer offers records at a fixed 50k records/s (record time = produce wall time,
//     ms) to a second topic the daemon also reads; each flag's record time is compared with the wall
//     time its durable batch reaches the daemon's output sink: latency_p50_ms, latency_p99_ms.
#include <librdkafka/rdkafka.h>
#include <spdlog/spdlog.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <filesystem>
#include <mutex>
#include <string>
#include <thread>
#include <vector>
#include <unistd.h>

#include "bench/bench.h"
#include "bench/kafka_bench_util.h"
#include "cli/daemon_setup.h"
#include "cli/sources.h"
#include "plimsoll/base/thread_name.h"
#include "plimsoll/kafka/embedded_broker.h"
#include "plimsoll/stream/config.h"
#include "plimsoll/stream/daemon.h"
#include "plimsoll/stream/decode.h"

namespace plimsoll::bench {
namespace {

namespace fs = std::filesystem;

int64_t WallMs() {
  return std::chrono::duration_cast<std::chrono::milliseconds>(std::chrono::system_clock::now().time_since_epoch())
      .count();
}

// Wraps the daemon's Kafka output sink: counts the records whose history points became durable
// (one per record here: every record is accepted, no aggregation) and how old each durable flag of
// the latency phase is.
class TimingSink final : public stream::OutputSink {
 public:
  TimingSink(stream::OutputSink* inner, int64_t warm_records, int64_t total_records)
      : inner_(inner), warm_(warm_records), total_(total_records) {}

  Status Publish(const store::CommitBatch& durable) override {
    const int64_t now_ms = WallMs();
    const auto now = std::chrono::steady_clock::now();
    std::lock_guard<std::mutex> lock(mu_);
    durable_records_ += static_cast<int64_t>(durable.history.size());
    if (start_records_ < 0 && durable_records_ >= warm_) {
      start_records_ = durable_records_;
      start_ = now;
    }
    if (durable_records_ >= total_ && end_records_ < 0) {
      end_records_ = durable_records_;
      end_ = now;
    }
    const int64_t since = latency_since_ms_.load();
    if (since > 0)
      for (const store::FlagRecord& f : durable.flags)
        if (f.time_ms >= since) latencies_ms_.push_back(static_cast<double>(now_ms - f.time_ms));
    return inner_ != nullptr ? inner_->Publish(durable) : Status::Ok();
  }

  bool Done() const {
    std::lock_guard<std::mutex> lock(mu_);
    return end_records_ >= 0;
  }
  double Rate() const {
    std::lock_guard<std::mutex> lock(mu_);
    const double seconds = std::chrono::duration<double>(end_ - start_).count();
    return seconds > 0 ? static_cast<double>(end_records_ - start_records_) / seconds : 0;
  }
  int64_t MeasuredRecords() const {
    std::lock_guard<std::mutex> lock(mu_);
    return end_records_ - start_records_;
  }
  void StartLatency(int64_t since_ms) { latency_since_ms_.store(since_ms); }
  std::vector<double> Latencies() const {
    std::lock_guard<std::mutex> lock(mu_);
    return latencies_ms_;
  }

 private:
  stream::OutputSink* inner_;
  int64_t warm_, total_;
  mutable std::mutex mu_;
  int64_t durable_records_ = 0;
  int64_t start_records_ = -1, end_records_ = -1;
  std::chrono::steady_clock::time_point start_, end_;
  std::atomic<int64_t> latency_since_ms_{0};
  std::vector<double> latencies_ms_;
};

// Offers records at `rate` per second for `seconds` (time = produce wall time in ms), keyed by series.
Status OfferAtRate(const std::string& bootstrap, const std::string& topic, int series, int rate, double seconds,
                   int64_t* offered) {
  char err[512];
  rd_kafka_conf_t* conf = rd_kafka_conf_new();
  if (rd_kafka_conf_set(conf, "bootstrap.servers", bootstrap.c_str(), err, sizeof(err)) != RD_KAFKA_CONF_OK ||
      rd_kafka_conf_set(conf, "linger.ms", "1", err, sizeof(err)) != RD_KAFKA_CONF_OK) {
    rd_kafka_conf_destroy(conf);
    return Status::InvalidArgument(err);
  }
  rd_kafka_t* producer = rd_kafka_new(RD_KAFKA_PRODUCER, conf, err, sizeof(err));
  if (producer == nullptr) return Status::Unavailable(err);
  const auto begin = std::chrono::steady_clock::now();
  const int64_t total = static_cast<int64_t>(rate * seconds);
  std::vector<int64_t> last_time(static_cast<size_t>(series), 0);
  int64_t sent = 0;
  Status status;
  while (sent < total) {
    const double elapsed = std::chrono::duration<double>(std::chrono::steady_clock::now() - begin).count();
    const int64_t due = std::min<int64_t>(total, static_cast<int64_t>(elapsed * rate) + 1);
    for (; sent < due; ++sent) {
      const int s = static_cast<int>(sent % series);
      // Strictly increasing times per series (a series gets a record every series/rate seconds).
      const int64_t t = std::max(WallMs(), last_time[static_cast<size_t>(s)] + 1);
      last_time[static_cast<size_t>(s)] = t;
      const std::string key = "s" + std::to_string(s);
      const std::string value = "{\"series\":\"" + key + "\",\"time\":" + std::to_string(t) +
                                ",\"value\":" + std::to_string(100 + (sent * 7919) % 997) + ".25}";
      rd_kafka_resp_err_t e = rd_kafka_producev(producer, RD_KAFKA_V_TOPIC(topic.c_str()),
                                                RD_KAFKA_V_MSGFLAGS(RD_KAFKA_MSG_F_COPY),
                                                RD_KAFKA_V_KEY(key.data(), key.size()),
                                                RD_KAFKA_V_VALUE(const_cast<char*>(value.data()), value.size()),
                                                RD_KAFKA_V_END);
      if (e == RD_KAFKA_RESP_ERR__QUEUE_FULL) {
        rd_kafka_poll(producer, 1);
        --sent;
        continue;
      }
      if (e != RD_KAFKA_RESP_ERR_NO_ERROR) status = Status::Unavailable(rd_kafka_err2str(e));
    }
    rd_kafka_poll(producer, 0);
    std::this_thread::sleep_for(std::chrono::microseconds(500));
  }
  rd_kafka_flush(producer, 10000);
  rd_kafka_destroy(producer);
  *offered = sent;
  return status;
}

double Percentile(std::vector<double> v, double q) {
  if (v.empty()) return -1;
  std::sort(v.begin(), v.end());
  const size_t i = std::min(v.size() - 1, static_cast<size_t>(q * static_cast<double>(v.size())));
  return v[i];
}

// One daemon read of the throughput topic from the beginning (fresh group and SQLite file); with
// `latency_seconds` > 0, also the latency phase on `latency_topic` afterwards. `commit_records`
// is the group commit's record cap (watch's default 50k; --quick's 50k records need a smaller one
// for commits to fall inside the measured window).
struct DaemonRound {
  double records_per_s = 0;
  int64_t measured_records = 0;
  uint64_t fits = 0, flags = 0;
  int64_t offered = 0;
  std::vector<double> latencies;
};

Result<DaemonRound> RunDaemonRound(const std::string& bootstrap, const std::string& topic,
                                   const std::string& latency_topic, int round, int64_t records,
                                   int64_t warm_records, int series, double latency_seconds,
                                   int64_t commit_records) {
  constexpr int kOfferedRate = 50'000;
  // The embedded broker answers a fetch that finds no data only after fetch.wait.max.ms
  // (librdkafka's default 500 ms), which would dominate the latency figure; 10 ms keeps it small.
  constexpr int kFetchWaitMs = 10;
  const fs::path dir =
      fs::temp_directory_path() / ("plimsoll-pipeline-bench-" + std::to_string(getpid()) + "-" + std::to_string(round));
  fs::remove_all(dir);
  fs::create_directories(dir);
  const std::string topics = latency_seconds > 0 ? "\"" + topic + "\", \"" + latency_topic + "\"" : "\"" + topic + "\"";
  const std::string toml =
      "[source]\nkind = \"kafka\"\n[source.kafka]\ntopics = [" + topics + "]\ngroup = \"bench-pipeline-" +
      std::to_string(round) + "\"\n[source.kafka.properties]\n\"bootstrap.servers\" = \"" + bootstrap +
      "\"\n\"session.timeout.ms\" = 6000\n\"heartbeat.interval.ms\" = 1000\n"
      "\"fetch.wait.max.ms\" = " + std::to_string(kFetchWaitMs) + "\n"
      "[sink]\nflags_topic = \"bench.flags\"\nalerts_topic = \"bench.alerts\"\nmodels_topic = \"bench.models\"\n"
      "[store]\npath = \"" + (dir / "bench.db").string() + "\"\ncommit_ms = 100\ncommit_records = " +
      std::to_string(commit_records) + "\n"
      "[[profile]]\nmatch = \"*\"\nwarmup = 20\nhistory = 200\nband = 0.9\nforms = [\"ANN\"]\n";
  auto config = stream::ParseConfig(toml, "pipeline bench");
  if (!config.ok()) return config.status();
  auto daemon = cli::OpenDaemon(*config, SystemClock());
  if (!daemon.ok()) return daemon.status();
  auto opened = cli::OpenSource(*config, **daemon);
  if (!opened.ok()) return opened.status();
  TimingSink timing(opened->sink.get(), warm_records, records);
  stream::RecordDecoder decoder(config->source.decode);
  std::atomic<bool> stop{false};
  Status run;
  std::thread owner([&] {
    NameThisThread("bench-owner");  // apart from the plain consumer's thread in profiles
    run = (*daemon)->Run(*opened->source, decoder, stop, &timing);
  });

  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(300);
  while (!timing.Done() && std::chrono::steady_clock::now() < deadline)
    std::this_thread::sleep_for(std::chrono::milliseconds(20));
  const bool done = timing.Done();

  DaemonRound out;
  Status offer;
  if (done && latency_seconds > 0) {
    timing.StartLatency(WallMs());
    offer = OfferAtRate(bootstrap, latency_topic, series, kOfferedRate, latency_seconds, &out.offered);
    std::this_thread::sleep_for(std::chrono::milliseconds(1000));  // the last commits
  }
  stop.store(true);
  owner.join();
  out.fits = (*daemon)->engine().counters().fits;
  out.flags = (*daemon)->engine().counters().flags;
  opened->source.reset();
  opened->sink.reset();
  daemon->reset();
  fs::remove_all(dir);
  if (!done) return Status::Unavailable("the pipeline did not make all records durable within 300 s");
  if (!run.ok()) return run;
  if (!offer.ok()) return offer;
  if (timing.MeasuredRecords() <= 0)
    return Status::Unavailable("every record after the warm-up prefix became durable in one commit: nothing to time");
  out.records_per_s = timing.Rate();
  out.measured_records = timing.MeasuredRecords();
  out.latencies = timing.Latencies();
  return out;
}

double Median(std::vector<double> v) { return Percentile(std::move(v), 0.5); }

BenchReport RunPipelineBench(const BenchArgs& args) {
  const int64_t records = args.quick ? 50'000 : 1'000'000;
  const int series = args.quick ? 100 : 1000;
  const int64_t warm_records = 30LL * series;
  const double latency_seconds = args.quick ? 2.0 : 6.0;
  // Plain consume and pipeline alternate; the ratio is taken per round and its median reported
  // (on a shared 2-core machine one plain-consume figure alone swung 2x between runs).
  const int rounds = args.quick ? 1 : 3;
  const int partitions = 4;
  const std::string topic = "bench.pipeline";
  const std::string latency_topic = "bench.latency";
  BenchReport report;
  const auto level = spdlog::get_level();
  spdlog::set_level(spdlog::level::warn);  // keep start-up lines off the report
  const auto fail = [&](const Status& s) {
    spdlog::set_level(level);
    report.Add("error", s.ToString());
    return report;
  };

  kafka::EmbeddedBrokerOptions options;
  options.topics.push_back({topic, partitions});
  options.topics.push_back({latency_topic, partitions});
  for (const char* out : {"bench.flags", "bench.alerts", "bench.models"}) options.topics.push_back({out, partitions});
  auto broker = kafka::EmbeddedBroker::Start(options);
  if (!broker.ok()) return fail(broker.status());
  const std::string bootstrap = (*broker)->BootstrapServers();

  auto produced = ProduceJsonRecords(bootstrap, topic, records, series);
  if (!produced.ok()) return fail(produced.status());
  std::vector<double> consume_rates, pipeline_rates, ratios;
  DaemonRound last;
  for (int round = 0; round < rounds; ++round) {
    auto consumed = MeasurePlainConsume(bootstrap, topic, partitions, records);
    if (!consumed.ok()) return fail(consumed.status());
    auto piped = RunDaemonRound(bootstrap, topic, latency_topic, round, records, warm_records, series,
                                round + 1 == rounds ? latency_seconds : 0.0, args.quick ? 2'500 : 50'000);
    if (!piped.ok()) return fail(piped.status());
    consume_rates.push_back(consumed->records_per_s);
    pipeline_rates.push_back(piped->records_per_s);
    ratios.push_back(piped->records_per_s / consumed->records_per_s);
    last = std::move(*piped);
  }
  spdlog::set_level(level);

  const auto join = [](const std::vector<double>& v) {
    std::string out;
    for (double x : v) {
      if (!out.empty()) out += ' ';
      out += std::to_string(x);
    }
    return out;
  };
  report.Add("records", records);
  report.Add("series", static_cast<int64_t>(series));
  report.Add("partitions", static_cast<int64_t>(partitions));
  report.Add("rounds", static_cast<int64_t>(rounds));
  report.Add("consume_records_per_s", Median(consume_rates));
  report.Add("pipeline_records_per_s", Median(pipeline_rates));
  report.Add("pipeline_ratio", Median(ratios));
  report.Add("consume_records_per_s_by_round", join(consume_rates));
  report.Add("pipeline_records_per_s_by_round", join(pipeline_rates));
  report.Add("pipeline_ratio_by_round", join(ratios));
  report.Add("pipeline_measured_records", last.measured_records);
  report.Add("fits", static_cast<int64_t>(last.fits));
  report.Add("flags", static_cast<int64_t>(last.flags));
  report.Add("latency_offered_records_per_s", static_cast<int64_t>(50'000));
  report.Add("latency_offered_records", last.offered);
  report.Add("latency_flags", static_cast<int64_t>(last.latencies.size()));
  report.Add("latency_p50_ms", Percentile(last.latencies, 0.50));
  report.Add("latency_p99_ms", Percentile(last.latencies, 0.99));
  report.Add("commit_ms", static_cast<int64_t>(100));
  report.Add("fetch_wait_max_ms", static_cast<int64_t>(10));
  report.notes.push_back("embedded broker (in-process mock cluster over loopback); records produced once, before "
                         "all reads; each round reads them with a plain consumer, then with the daemon (fresh "
                         "group and SQLite file); figures are medians over rounds, ratio per round");
  report.notes.push_back("pipeline: KafkaSource + decode + update + flag + SQLite group commit (temp file, commit_ms "
                         "100) + KafkaSink; one fixed form (ANN), warm-up 20; timed from the first durable commit "
                         "past 30 steps per series (fits done) to all positions durable");
  report.notes.push_back("latency (last round): record time = produce wall time (ms); measured when the flag's batch "
                         "is durable (OutputSink); band 0.9 so about 10% of records are flagged");
  return report;
}

PLIMSOLL_BENCH("pipeline", "Kafka pipeline rate vs plain consume, and produce-to-durable-flag latency at 50k/s",
               RunPipelineBench);

}  // namespace
}  // namespace plimsoll::bench
