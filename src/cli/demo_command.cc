// `plimsoll demo`: the whole job on the embedded default, with nothing to set up. Starts an
// in-process broker, publishes an invented scenario (demo_scenario.h) through an idempotent
// producer in accelerated simulated time, runs the daemon against it, and prints what it found.
#include <CLI/CLI.hpp>
#include <librdkafka/rdkafka.h>
#include <spdlog/spdlog.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <charconv>
#include <filesystem>
#include <iomanip>
#include <iostream>
#include <map>
#include <sstream>
#include <string>
#include <thread>
#include <tuple>
#include <vector>

#include "cli/commands.h"
#include "cli/daemon_setup.h"
#include "cli/demo_scenario.h"
#include "cli/sources.h"
#include "plimsoll/fit/fit.h"
#include "plimsoll/kafka/handles.h"
#include "plimsoll/kafka/properties.h"
#include "plimsoll/stream/decode.h"
#include "plimsoll/stream/fit_chooser.h"
#include "plimsoll/stream/time.h"

namespace plimsoll::cli {
namespace {

namespace fs = std::filesystem;

constexpr char kTopic[] = "plimsoll.demo.observations";

struct DemoFlags {
  double duration_days = 1.0;  // simulated days after the warm-up history
  int history_days = 3;
  double speed = 14'400.0;     // simulated seconds per real second in the live part
  uint64_t seed = 1;
  std::string dir = "plimsoll-demo";
};

// The demo's configuration, built in code: embedded broker with ONE partition for observations
// (the generator's global time order reaches the daemon unchanged, so a seed always gives the
// same flags), no HTTP listener, the scenario's profiles.
Result<stream::Config> DemoConfig(const std::string& store_path) {
  std::string toml = R"([source]
kind = "embedded"

[source.kafka]
topics = [")" + std::string(kTopic) + R"("]
group = "plimsoll-demo"
partitions = 1

[http]
listen = ""

[logging]
level = "warn"

)" + DemoProfilesToml();
  Result<stream::Config> config = stream::ParseConfig(toml, "demo configuration");
  if (config.ok()) config->store.path = store_path;
  return config;
}

std::string FormatValue(double v) {
  char buf[32];
  auto [end, ec] = std::to_chars(buf, buf + sizeof buf, v);
  return ec == std::errc() ? std::string(buf, end) : "null";
}

// Publishes the scenario: history unpaced, then the live part paced at `speed`. Owns its RAII
// producer; `consumed` (the daemon's record counter) bounds how far it may run ahead, since the
// embedded broker keeps only about 5 MiB per partition.
class Generator {
 public:
  Generator(const DemoScenario& scenario, double speed, std::string bootstrap, const std::atomic<uint64_t>& consumed,
            const std::atomic<bool>& stop)
      : scenario_(scenario), speed_(speed), bootstrap_(std::move(bootstrap)), consumed_(consumed), stop_(stop) {}

  Status Run() {
    kafka::Properties props = kafka::MergeProperties(
        kafka::ProducerDefaults(), {{"bootstrap.servers", bootstrap_}, {"client.id", "plimsoll-demo-generator"}});
    Result<kafka::KafkaConf> conf = kafka::BuildConf(props);
    if (!conf.ok()) return conf.status();
    rd_kafka_conf_set_opaque(conf->get(), this);
    rd_kafka_conf_set_dr_msg_cb(conf->get(), &Generator::OnDelivery);
    Result<kafka::KafkaHandle> producer = kafka::KafkaHandle::Create(RD_KAFKA_PRODUCER, std::move(conf).value(), 10'000);
    if (!producer.ok()) return producer.status();
    rd_kafka_t* rk = producer->get();

    constexpr int64_t kChunkMs = 60'000;  // one simulated minute per chunk
    std::vector<ScenarioRecord> chunk;
    std::string json;
    bool live = false;
    for (int64_t t = scenario_.start_ms(); t < scenario_.end_ms() && !stop_.load(); t += kChunkMs) {
      if (t >= scenario_.live_start_ms()) {
        if (!live) live_real_start_ = std::chrono::steady_clock::now();
        live = true;
        auto due = live_real_start_ + std::chrono::duration<double>(
                                          static_cast<double>(t - scenario_.live_start_ms()) / 1000.0 / speed_);
        std::this_thread::sleep_until(std::chrono::time_point_cast<std::chrono::steady_clock::duration>(due));
      }
      while (produced_.load() > consumed_.load() + kMaxAhead && !stop_.load()) {
        rd_kafka_poll(rk, 10);
      }
      chunk.clear();
      scenario_.Generate(t, t + kChunkMs, chunk);
      for (const ScenarioRecord& r : chunk) {
        const std::string& name = scenario_.series()[r.series].name;
        json = "{\"series\":\"" + name + "\",\"time\":\"" + stream::FormatIsoTime(r.time_ms) +
               "\",\"value\":" + FormatValue(r.value) + "}";
        for (;;) {
          rd_kafka_resp_err_t err = rd_kafka_producev(
              rk, RD_KAFKA_V_TOPIC(kTopic), RD_KAFKA_V_KEY(name.data(), name.size()),
              RD_KAFKA_V_VALUE(json.data(), json.size()), RD_KAFKA_V_MSGFLAGS(RD_KAFKA_MSG_F_COPY), RD_KAFKA_V_END);
          if (err == RD_KAFKA_RESP_ERR_NO_ERROR) break;
          if (err != RD_KAFKA_RESP_ERR__QUEUE_FULL) return kafka::KafkaStatus(err, "demo generator produce");
          rd_kafka_poll(rk, 10);
        }
        produced_.fetch_add(1);
      }
      rd_kafka_poll(rk, 0);
    }
    rd_kafka_resp_err_t err = rd_kafka_flush(rk, 30'000);
    if (err != RD_KAFKA_RESP_ERR_NO_ERROR) return kafka::KafkaStatus(err, "demo generator flush");
    if (failed_.load() > 0)
      return Status::Unavailable(std::to_string(failed_.load()) + " demo records were not delivered");
    return Status::Ok();
  }

  uint64_t produced() const { return produced_.load(); }
  uint64_t delivered() const { return delivered_.load(); }

 private:
  static constexpr uint64_t kMaxAhead = 50'000;  // ~4 MB of JSON, well inside what the embedded broker keeps

  static void OnDelivery(rd_kafka_t*, const rd_kafka_message_t* message, void* opaque) {
    auto* self = static_cast<Generator*>(opaque);
    if (message->err == RD_KAFKA_RESP_ERR_NO_ERROR) self->delivered_.fetch_add(1);
    else self->failed_.fetch_add(1);
  }

  const DemoScenario& scenario_;
  double speed_;
  std::string bootstrap_;
  const std::atomic<uint64_t>& consumed_;
  const std::atomic<bool>& stop_;
  std::chrono::steady_clock::time_point live_real_start_;
  std::atomic<uint64_t> produced_{0};
  std::atomic<uint64_t> delivered_{0};
  std::atomic<uint64_t> failed_{0};
};

const char* FamilyName(FeedFamily f) {
  switch (f) {
    case FeedFamily::kQueue: return "calls per 15 min";
    case FeedFamily::kTransactions: return "card payments per min";
    case FeedFamily::kSensor: return "sensor reading per min";
  }
  return "";
}

std::string ShortTime(int64_t ms) {
  std::string iso = stream::FormatIsoTime(ms);  // 2026-03-05T09:45:00Z
  return iso.substr(0, 10) + " " + iso.substr(11, 5);
}

std::string Fixed(double v, int digits) {
  if (!std::isfinite(v)) return "-";
  std::ostringstream out;
  out << std::fixed << std::setprecision(digits) << v;
  return out.str();
}

// Reads the finished store and prints the report.
Status PrintSummary(const std::string& store_path, const DemoScenario& scenario, const stream::Config& config,
                    const std::string& run_line, double seconds, std::ostream& out) {
  store::StoreOptions options;
  options.path = store_path;
  options.read_only = true;
  Result<std::unique_ptr<store::Store>> opened = store::Store::Open(options);
  if (!opened.ok()) return opened.status().WithContext("reading the demo store");
  store::Store& db = **opened;
  Result<std::vector<store::FlagRecord>> flags = db.RecentFlags("", 10'000'000);
  if (!flags.ok()) return flags.status();
  Result<std::vector<store::AlertRecord>> alerts = db.RecentAlerts("", 100'000);
  if (!alerts.ok()) return alerts.status();
  std::map<std::string, int> flag_count, raised_count;
  for (const store::FlagRecord& f : *flags) ++flag_count[f.series];
  for (const store::AlertRecord& a : *alerts)
    if (a.kind == store::AlertKind::kRaised) ++raised_count[a.series];

  out << "\n== plimsoll demo: what happened ==\n"
      << "Simulated " << ShortTime(scenario.start_ms()) << " to " << ShortTime(scenario.end_ms()) << " UTC: "
      << (scenario.live_start_ms() - scenario.start_ms()) / 86'400'000 << " day(s) of warm-up history, then "
      << Fixed(static_cast<double>(scenario.end_ms() - scenario.live_start_ms()) / 86'400'000.0, 2)
      << " day(s) watched live; " << Fixed(seconds, 1) << " s of real time.\n"
      << "Daemon: " << run_line << "\n\n";

  out << "Models fitted when each series finished its warm-up (AICc among the candidates):\n";
  for (const stream::ProfileOptions& p : config.profiles) {
    out << "  " << std::left << std::setw(10) << p.match << " grid "
        << (p.interval_ms ? stream::FormatDuration(*p.interval_ms) : std::string("none"))
        << (p.aggregate == stream::AggregateKind::kCount ? " (count)" : "") << ", period " << p.period
        << ", warm-up " << p.warmup << " points, candidates";
    for (const model::ModelSpec& f : p.forms) out << " " << f.Notation();
    out << "\n";
  }

  out << "\n" << std::left << std::setw(40) << "SERIES" << std::setw(24) << "FEED" << std::setw(13) << "FORM"
      << std::right << std::setw(7) << "FLAGS" << std::setw(8) << "ALERTS" << "\n";
  for (const ScenarioSeries& s : scenario.series()) {
    Result<store::StoredSeries> stored = db.GetSeries(s.name);
    std::string form = "-";
    if (stored.ok() && stored->model) form = stored->model->spec;
    else if (stored.ok()) form = "(warming up)";
    else form = "(not stored)";
    out << std::left << std::setw(40) << s.name << std::setw(24) << FamilyName(s.family) << std::setw(13) << form
        << std::right << std::setw(7) << flag_count[s.name] << std::setw(8) << raised_count[s.name] << "\n";
  }

  out << "\nWhat the scenario injected:\n";
  for (const InjectedEvent& e : scenario.events()) {
    out << "  " << ShortTime(e.start_ms) << "  " << std::left << std::setw(12) << e.kind << std::setw(40) << e.series;
    if (e.kind == "outage") out << " silent until " << ShortTime(e.end_ms);
    else if (e.kind == "level shift") out << " +4.5 deg C from here on";
    out << "\n";
  }

  out << "\nAlerts (oldest first; value = the observation at that step, expected = band centre of the flag):\n";
  if (alerts->empty()) out << "  none\n";
  std::map<std::pair<std::string, int64_t>, const store::FlagRecord*> flag_at;
  for (const store::FlagRecord& f : *flags) flag_at[{f.series, f.step}] = &f;
  std::vector<store::AlertRecord> ordered = *alerts;
  std::sort(ordered.begin(), ordered.end(), [](const store::AlertRecord& x, const store::AlertRecord& y) {
    return std::tie(x.time_ms, x.series, x.kind) < std::tie(y.time_ms, y.series, y.kind);
  });
  for (const store::AlertRecord& a : ordered) {
    std::string value = "-", expected = "";
    if (auto f = flag_at.find({a.series, a.step}); f != flag_at.end()) {
      value = Fixed(f->second->value, 2);
      expected = "  (expected " + Fixed(f->second->expected, 2) + ", band " + Fixed(f->second->lower, 2) + " to " +
                 Fixed(f->second->upper, 2) + ")";
    } else if (Result<store::HistorySlice> h = db.HistoryTail(a.series, 100'000); h.ok()) {
      int64_t i = a.step - h->first_step;
      if (i >= 0 && i < static_cast<int64_t>(h->values.size())) value = Fixed(h->values[static_cast<size_t>(i)], 2);
    }
    out << "  " << ShortTime(a.time_ms) << "  " << std::left << std::setw(8)
        << (a.kind == store::AlertKind::kRaised ? "RAISED" : "cleared") << std::setw(40) << a.series << " value "
        << value << expected << "\n";
  }

  out << "\nEverything is in the SQLite file " << store_path << "\n"
      << "  look closer:        plimsoll inspect --store " << store_path << "                 (all series)\n"
      << "                      plimsoll inspect --store " << store_path << " sensor.gullhaven-coldroom-2.temp\n"
      << "  on a real cluster:  write a config with\n"
      << "                        [source]                   kind = \"kafka\"\n"
      << "                        [source.kafka]             topics = [\"your.topic\"], group = \"plimsoll\"\n"
      << "                        [source.kafka.properties]  bootstrap.servers = \"host1:9092,host2:9092\"\n"
      << "                        [[profile]]                match, interval, period, forms, warmup (see "
         "config/plimsoll.toml)\n"
      << "                      then run: plimsoll watch --config your.toml\n"
      << "\nCaution: flags, alerts and staffing figures are decision support for people who know the\n"
      << "operation. Sensor flags do not replace certified safety instrumentation or alarms required\n"
      << "by local codes. The scenario, its companies and its numbers are invented.\n";
  return Status::Ok();
}

int RunDemo(const DemoFlags& flags) {
  StopOnSignal stop;  // first, before any thread starts
  if (!(flags.duration_days > 0.0) || flags.duration_days > 60.0) {
    std::cerr << "plimsoll demo: --duration " << flags.duration_days << " is not in (0, 60] simulated days\n";
    return 2;
  }
  if (!(flags.speed > 0.0)) {
    std::cerr << "plimsoll demo: --speed must be positive (simulated seconds per real second)\n";
    return 2;
  }
  if (flags.history_days < 2 || flags.history_days > 28) {
    std::cerr << "plimsoll demo: --history-days " << flags.history_days
              << " is not in 2..28 (queues need two days to warm up)\n";
    return 2;
  }
  std::error_code ec;
  fs::create_directories(flags.dir, ec);
  if (ec) {
    std::cerr << "plimsoll demo: --dir '" << flags.dir << "': " << ec.message() << "\n";
    return 1;
  }
  const std::string store_path = (fs::path(flags.dir) / "demo.db").string();
  for (const char* suffix : {"", "-wal", "-shm"}) fs::remove(store_path + suffix, ec);  // a fresh store each run

  Result<stream::Config> config = DemoConfig(store_path);
  if (!config.ok()) {
    std::cerr << "plimsoll demo: " << config.status().ToString() << "\n";
    return 1;
  }
  if (Status s = ApplyLogging(config->logging); !s.ok()) {
    std::cerr << "plimsoll demo: " << s.message() << "\n";
    return 1;
  }
  ScenarioOptions scenario_options;
  scenario_options.history_days = flags.history_days;
  scenario_options.live_days = flags.duration_days;
  scenario_options.seed = flags.seed;
  const DemoScenario scenario(scenario_options);

  std::cout << "plimsoll demo: " << scenario.series().size() << " invented feeds, seed " << flags.seed
            << ", store " << store_path << "\n"
            << "  publishing " << flags.history_days << " day(s) of history at full speed, then "
            << flags.duration_days << " simulated day(s) at " << flags.speed << "x\n"
            << std::flush;
  const auto started = std::chrono::steady_clock::now();

  Result<std::unique_ptr<store::Store>> store = store::Store::Open(StoreOptionsFor(*config));
  if (!store.ok()) {
    std::cerr << "plimsoll demo: " << store.status().WithContext("store '" + store_path + "'").ToString() << "\n";
    return 1;
  }
  stream::DaemonOptions daemon_options = stream::DaemonOptionsFromConfig(*config);
  daemon_options.event_time = true;  // simulated time: record times close the count buckets
  Result<std::unique_ptr<stream::Daemon>> daemon =
      stream::Daemon::Open(daemon_options, stream::EngineOptionsFromConfig(*config),
                           stream::MakeFitChooser(fit::FitOptions{}, SystemClock()), std::move(store).value(),
                           SystemClock());
  if (!daemon.ok()) {
    std::cerr << "plimsoll demo: " << daemon.status().ToString() << "\n";
    return 1;
  }
  Result<OpenedSource> source = OpenSource(*config, **daemon);
  if (!source.ok()) {
    std::cerr << "plimsoll demo: " << source.status().ToString() << "\n";
    return 1;
  }

  Generator generator(scenario, flags.speed, source->bootstrap, (*daemon)->counters().records, stop.requested());
  Status generated;
  std::atomic<bool> generator_done{false};
  std::thread producer([&] {
    generated = generator.Run();
    generator_done.store(true);
  });
  // Stops the daemon once every delivered record has been read (or the generator failed, or
  // nothing has arrived for 20 s after the generator ended).
  std::atomic<bool> finished{false};
  std::atomic<bool> stopped_by_us{false};  // otherwise SIGINT/SIGTERM ended the run early
  std::thread watcher([&] {
    uint64_t last = 0;
    auto last_change = std::chrono::steady_clock::now();
    while (!finished.load() && !stop.requested().load()) {
      std::this_thread::sleep_for(std::chrono::milliseconds(50));
      uint64_t read = (*daemon)->counters().records.load();
      if (read != last) {
        last = read;
        last_change = std::chrono::steady_clock::now();
      }
      if (!generator_done.load()) continue;
      if (!generated.ok() || read >= generator.delivered() ||
          std::chrono::steady_clock::now() - last_change > std::chrono::seconds(20)) {
        stopped_by_us.store(true);
        stop.Request();
      }
    }
  });
  stream::RecordDecoder decoder(config->source.decode);
  Status run = (*daemon)->Run(*source->source, decoder, stop.requested(), source->sink.get());
  finished.store(true);
  watcher.join();
  producer.join();
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  const std::string run_line = RunSummary(**daemon);
  const uint64_t read = (*daemon)->counters().records.load();
  source->source.reset();
  source->sink.reset();
  daemon->reset();

  int code = 0;
  if (!run.ok()) {
    std::cerr << "plimsoll demo: daemon: " << run.ToString() << "\n";
    code = 1;
  }
  if (!generated.ok()) {
    std::cerr << "plimsoll demo: generator: " << generated.ToString() << "\n";
    code = 1;
  }
  if (!stopped_by_us.load()) {
    std::cout << "\nStopped early by a signal: the summary covers the " << read << " records read so far.\n";
  } else if (code == 0 && read < generator.delivered()) {
    std::cerr << "plimsoll demo: the daemon read " << read << " of " << generator.delivered()
              << " published records before it was stopped\n";
    code = 1;
  }
  if (Status s = PrintSummary(store_path, scenario, *config, run_line, seconds, std::cout); !s.ok()) {
    std::cerr << "plimsoll demo: " << s.ToString() << "\n";
    code = 1;
  }
  return code;
}

void AddDemoVerb(CLI::App& app, CommandContext& context) {
  auto flags = std::make_shared<DemoFlags>();
  CLI::App* cmd = app.add_subcommand(
      "demo", "Run the whole job on an invented scenario: embedded broker, generator, daemon, summary");
  cmd->add_option("--duration", flags->duration_days,
                  "simulated days watched live after the warm-up history (default 1; fractions allowed)");
  cmd->add_option("--history-days", flags->history_days,
                  "whole simulated days of history published first, unpaced, for warm-up (default 3, 2..28)");
  cmd->add_option("--speed", flags->speed,
                  "simulated seconds per real second in the live part (default 14400: a day in 6 s)");
  cmd->add_option("--seed", flags->seed, "scenario seed; the same seed gives the same flags (default 1)");
  cmd->add_option("--dir", flags->dir, "directory for demo.db, replaced on every run (default ./plimsoll-demo)");
  cmd->callback([flags, &context] { context.exit_code = RunDemo(*flags); });
}

PLIMSOLL_REGISTER_VERB(AddDemoVerb);

}  // namespace
}  // namespace plimsoll::cli
