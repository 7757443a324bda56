// plimsoll-bench refit: background refits.
//
//   refits_per_s_per_thread     series refitted per second by ONE worker thread: n = 1000 points,
//                               m = 24, default candidate forms (fit::SelectModel through the
//                               daemon's chooser), snapshot read + fit + catch-up + swap
//   ingest_ratio_during_refits  engine ingest rate (Observe + group-commit hand-off on the owner
//                               thread) while one worker refits continuously, over the same
//                               records ingested with no refit service at all; one run, both
//                               measured back to back
//
// The history reader serves the generated series from memory (the store's read path is measured
// by the store bench), so the figures are the refit machinery and the fit.
#include <time.h>

#include <spdlog/spdlog.h>

#include <chrono>
#include <cmath>
#include <random>
#include <stdexcept>
#include <string>
#include <thread>
#include <vector>

#include "bench/bench.h"
#include "plimsoll/base/clock.h"
#include "plimsoll/fit/fit.h"
#include "plimsoll/refit/refit.h"
#include "plimsoll/stream/engine.h"
#include "plimsoll/stream/fit_chooser.h"

namespace plimsoll::bench {
namespace {

constexpr int kPeriod = 24;
constexpr int kHistory = 1000;
constexpr int64_t kHour = 3'600'000;

double CpuSeconds(clockid_t which) {
  timespec t{};
  clock_gettime(which, &t);
  return static_cast<double>(t.tv_sec) + 1e-9 * static_cast<double>(t.tv_nsec);
}

// Series i at step k: level, daily season and deterministic noise (a hash, so any step can be
// served without storing the series).
double Value(uint32_t series, int64_t step) {
  uint64_t h = (static_cast<uint64_t>(series) << 32) ^ static_cast<uint64_t>(step);
  h ^= h >> 33;
  h *= 0xff51afd7ed558ccdULL;
  h ^= h >> 33;
  h *= 0xc4ceb9fe1a85ec53ULL;
  h ^= h >> 33;
  const double u = static_cast<double>(h >> 11) * 0x1.0p-53 - 0.5;  // uniform in [-0.5, 0.5)
  const double season = 30.0 * std::sin(2.0 * M_PI * static_cast<double>(step % kPeriod) / kPeriod + series);
  return 200.0 + 10.0 * (series % 7) + season + 8.0 * u;
}

std::string Name(uint32_t series) { return "queue-" + std::to_string(series); }

// Serves the generated history of every series through its newest step (what the store holds).
class GeneratedReader final : public refit::HistoryReader {
 public:
  explicit GeneratedReader(const std::vector<std::atomic<int64_t>>* newest) : newest_(newest) {}
  Result<store::HistorySlice> Tail(std::string_view series, size_t n) override {
    const uint32_t id = static_cast<uint32_t>(std::stoul(std::string(series.substr(6))));
    const int64_t last = (*newest_)[id].load(std::memory_order_acquire);
    store::HistorySlice slice;
    slice.first_step = std::max<int64_t>(0, last - static_cast<int64_t>(n) + 1);
    for (int64_t k = slice.first_step; k <= last; ++k) slice.values.push_back(Value(id, k));
    return slice;
  }

 private:
  const std::vector<std::atomic<int64_t>>* newest_;
};

// A warm-up model without fitting (fitting is measured by the refits): ETS(A,N,A) with the
// series' own level and season, sigma2 wide enough to flag little.
Result<stream::ModelChoice> QuickChoice(std::span<const double> history) {
  stream::ModelChoice c;
  c.spec = model::ModelSpec{model::ErrorType::kAdditive, model::TrendType::kNone, model::SeasonType::kAdditive,
                            kPeriod};
  c.params.alpha = 0.1;
  c.params.gamma = 0.05;
  double mean = 0;
  for (int i = 0; i < kPeriod; ++i) mean += history[i];
  mean /= kPeriod;
  c.initial.level = mean;
  c.initial.season.resize(kPeriod);
  for (int i = 0; i < kPeriod; ++i) c.initial.season[i] = history[i] - mean;
  c.initial.sigma2 = 100.0;
  return c;
}

struct Setup {
  explicit Setup(uint32_t series) : newest(series) {
    stream::EngineOptions options;
    stream::SeriesRules rules;
    rules.match = "*";
    rules.interval_ms = kHour;
    rules.period = kPeriod;
    rules.warmup = 5 * kPeriod;
    rules.history = kHistory;
    options.profiles = {rules};
    engine = std::make_unique<stream::Engine>(
        options, [](std::span<const double> h, const stream::SeriesRules&, bool) { return QuickChoice(h); },
        SystemClock());
    for (auto& n : newest) n.store(-1);
    for (uint32_t i = 0; i < series; ++i) names.push_back(Name(i));
  }
  ~Setup() {
    if (service) service->Stop(*engine);
  }
  // One worker; series already fitted count as modelled now.
  void StartService(refit::TriggerRules triggers) {
    refit::RefitServiceOptions ro;
    ro.threads = 1;
    ro.profiles = {triggers};
    ro.max_lag_steps = 1'000'000;
    service = refit::MakeRefitService(ro, stream::MakeFitChooser(fit::FitOptions{}, SystemClock()),
                                      [this]() -> Result<std::unique_ptr<refit::HistoryReader>> {
                                        return std::unique_ptr<refit::HistoryReader>(
                                            std::make_unique<GeneratedReader>(&newest));
                                      },
                                      SystemClock());
    std::vector<stream::RestoredSeries> fitted;
    for (stream::SeriesId id = 0; id < engine->series_count(); ++id)
      if (!engine->View(id).warming_up) fitted.push_back({id, "*", SystemClock()->WallMillis(), NAN});
    service->Start(*engine, fitted);
  }
  // Rounds [from, to) of every series, series interleaved; a group commit every `commit` records.
  void Feed(int64_t from, int64_t to, size_t commit = 50'000) {
    size_t since = 0;
    for (int64_t k = from; k < to; ++k) {
      for (uint32_t i = 0; i < newest.size(); ++i) {
        engine->Observe(names[i], k * kHour, Value(i, k), {}, 0, 0);
        if (++since == commit) {
          Commit();
          since = 0;
        }
      }
    }
    Commit();
  }
  void Commit() {
    stream::EngineBatch taken = engine->TakeBatch();
    for (const stream::HistoryPoint& h : taken.history) newest[h.series].store(h.step, std::memory_order_release);
    events.clear();
    if (service) service->OnBatch(*engine, taken, SystemClock()->WallMillis(), events);
    KeepAlive(taken.history.size());
  }
  refit::RefitCounters Counters() const { return refit::CountersOf(*service); }

  std::vector<std::atomic<int64_t>> newest;  // newest stored step per series (what readers see)
  std::vector<std::string> names;
  std::unique_ptr<stream::Engine> engine;
  std::unique_ptr<stream::RefitService> service;
  std::vector<store::EventRecord> events;
};

BenchReport Run(const BenchArgs& args) {
  spdlog::set_level(spdlog::level::warn);  // one info line per refit otherwise
  BenchReport report;

  // 1. Refit throughput of one worker: `refits` series, each refitted once on its last 1000 steps.
  const uint32_t refits = args.quick ? 3 : 12;
  double refit_wall = 0, refit_cpu = 0;
  {
    Setup s(refits);
    s.Feed(0, kHistory);
    s.StartService(refit::TriggerRules{1, std::nullopt, false});  // the next observation queues a refit
    const auto wall0 = std::chrono::steady_clock::now();
    const double cpu0 = CpuSeconds(CLOCK_PROCESS_CPUTIME_ID);
    s.Feed(kHistory, kHistory + 1);
    while (s.Counters().installed + s.Counters().failed + s.Counters().timed_out < refits) {
      std::this_thread::sleep_for(std::chrono::milliseconds(2));
      s.Commit();
    }
    refit_cpu = CpuSeconds(CLOCK_PROCESS_CPUTIME_ID) - cpu0;
    refit_wall = std::chrono::duration<double>(std::chrono::steady_clock::now() - wall0).count();
    if (s.Counters().installed != refits) throw std::runtime_error("some benchmark refits failed");
  }

  // 2. Ingest with refits off (no service) and on (one worker kept busy by count triggers).
  const uint32_t series = args.quick ? 200 : 2000;
  const int64_t rounds = args.quick ? 400 : 2000;
  const int64_t warm = 5 * kPeriod;
  auto ingest = [&](bool with_service, refit::RefitCounters* counters) {
    // Each series asks for a refit every 50 observations: far more than one worker does, so it
    // never idles while the owner ingests.
    Setup s(series);
    if (with_service) s.StartService(refit::TriggerRules{50, std::nullopt, false});
    s.Feed(0, warm);
    const auto wall0 = std::chrono::steady_clock::now();
    const double cpu0 = CpuSeconds(CLOCK_THREAD_CPUTIME_ID);
    s.Feed(warm, warm + rounds);
    const double cpu = CpuSeconds(CLOCK_THREAD_CPUTIME_ID) - cpu0;
    const double wall = std::chrono::duration<double>(std::chrono::steady_clock::now() - wall0).count();
    if (counters != nullptr) *counters = s.Counters();
    const double n = static_cast<double>(series) * static_cast<double>(rounds);
    return std::pair<double, double>{n / wall, n / cpu};
  };
  const auto [off_rate, off_cpu_rate] = ingest(false, nullptr);
  refit::RefitCounters during{};
  const auto [on_rate, on_cpu_rate] = ingest(true, &during);

  report.Add("refits_per_s_per_thread", static_cast<double>(refits) / refit_wall);
  report.Add("refit_ms_mean", 1000.0 * refit_wall / refits);
  report.Add("refit_cpu_ms_mean", 1000.0 * refit_cpu / refits);
  report.Add("ingest_records_per_s_refits_off", off_rate);
  report.Add("ingest_records_per_s_refits_on", on_rate);
  report.Add("ingest_ratio_during_refits", on_rate / off_rate);
  report.Add("ingest_ratio_cpu", on_cpu_rate / off_cpu_rate);
  report.Add("refits_during_ingest", static_cast<int64_t>(during.installed));
  report.Add("hardware_threads", static_cast<int64_t>(std::thread::hardware_concurrency()));
  report.notes.push_back("refits: n = 1000, m = 24, default candidates (fit::FitOptions defaults), one worker thread, "
                         "history served from memory; " + std::to_string(refits) + " series");
  report.notes.push_back("ingest: " + std::to_string(series) + " series x " + std::to_string(rounds) +
                         " rounds, m = 24, group commit every 50k records; refits on = one worker refitting all the "
                         "time (count trigger every 50 observations); off = no refit service");
  report.notes.push_back("the ratio needs a free core for the worker: on a shared 2-core box it measures contention");
  return report;
}

PLIMSOLL_BENCH("refit", "background refits: refits per second per worker, ingest rate while refitting", Run);

}  // namespace
}  // namespace plimsoll::bench
