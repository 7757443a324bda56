// One-step update throughput per form and season length: series already located, state in
// cache, observations read from a small pre-generated stream (data-dependent, so nothing can be
// hoisted out of the loop). Calls go through SelectUpdate's function pointer, as the engine's
// per-series path does, and also through the inlined kernel loop the likelihood uses.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <ctime>
#include <limits>
#include <vector>

#include "bench/bench.h"
#include "model/update_kernels.h"
#include "plimsoll/model/update.h"

namespace plimsoll::bench {
namespace {

using model::ModelSpec;

constexpr size_t kStream = 4096;  // observations cycled through (32 KB: stays in L1/L2)

std::vector<double> MakeStream(int m) {
  std::vector<double> y(kStream);
  uint64_t x = 0x9e3779b97f4a7c15ull;
  for (size_t t = 0; t < kStream; ++t) {
    x ^= x << 13;
    x ^= x >> 7;
    x ^= x << 17;
    const double noise = static_cast<double>(x >> 11) * 0x1.0p-53 - 0.5;
    y[t] = 100.0 + 10.0 * std::sin(6.283185307179586 * static_cast<double>(t % static_cast<size_t>(m)) / m) +
           4.0 * noise;
  }
  return y;
}

model::State StartState(const ModelSpec& spec) {
  std::vector<double> season(spec.has_season() ? static_cast<size_t>(spec.period) : 0,
                             spec.season == model::SeasonType::kMultiplicative ? 1.0 : 0.0);
  return model::MakeState(100.0, spec.multiplicative_trend() ? 1.0 : 0.0, season);
}

double ThreadCpuNs() {
  timespec ts{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return static_cast<double>(ts.tv_sec) * 1e9 + static_cast<double>(ts.tv_nsec);
}

struct Timing {
  double wall_ns = std::numeric_limits<double>::infinity();  // per update, best run
  double cpu_ns = std::numeric_limits<double>::infinity();   // thread CPU time per update, best run
};

// Best of `reps` timings of `updates` steps. On a shared machine the thread CPU time excludes
// the periods this thread was descheduled, so it is reported beside the wall time.
template <typename Step>
Timing TimeLoop(int64_t updates, int reps, const std::vector<double>& y, Step&& step) {
  Timing best;
  for (int r = 0; r < reps; ++r) {
    double sink = 0.0;
    const double cpu0 = ThreadCpuNs();
    auto start = std::chrono::steady_clock::now();
    for (int64_t i = 0; i < updates; ++i) sink += step(y[static_cast<size_t>(i) & (kStream - 1)]);
    const double ns = std::chrono::duration<double, std::nano>(std::chrono::steady_clock::now() - start).count();
    const double cpu = ThreadCpuNs() - cpu0;
    KeepAlive(sink);
    best.wall_ns = std::min(best.wall_ns, ns / static_cast<double>(updates));
    best.cpu_ns = std::min(best.cpu_ns, cpu / static_cast<double>(updates));
  }
  return best;
}

BenchReport RunUpdateBench(const BenchArgs& args) {
  const int64_t updates = args.quick ? 100'000 : 1'000'000;
  const int reps = args.quick ? 2 : 5;
  const model::Params params{0.3, 0.05, 0.1, 0.95};
  BenchReport report;
  double worst_stable_m52 = 0.0;
  double worst_stable_cpu_m52 = 0.0;
  for (int m : {1, 12, 24, 52, 168}) {
    const std::vector<double> y = MakeStream(m);
    for (const ModelSpec& spec : model::AllForms(m)) {
      if (spec.has_season() != (m > 1)) continue;  // m = 1: non-seasonal forms only
      model::State st = StartState(spec);
      model::UpdateFn fn = model::SelectUpdate(spec);
      const Timing via_pointer = TimeLoop(updates, reps, y, [&](double v) { return fn(params, st, v).mu; });
      st = StartState(spec);
      const Timing inlined = model::internal::DispatchForm(spec, [&]<typename K>(K) {
        return TimeLoop(updates, reps, y, [&](double v) { return K::Step(params, st, v).mu; });
      });
      BenchFields row;
      row.emplace_back("form", spec.Notation());
      row.emplace_back("m", int64_t{m});
      row.emplace_back("ns_per_update", via_pointer.wall_ns);
      row.emplace_back("cpu_ns_per_update", via_pointer.cpu_ns);
      row.emplace_back("ns_per_update_inlined", inlined.wall_ns);
      row.emplace_back("cpu_ns_per_update_inlined", inlined.cpu_ns);
      row.emplace_back("stable", std::string(spec.is_stable() ? "yes" : "no"));
      if (spec.is_stable() && m <= 52) {
        worst_stable_m52 = std::max(worst_stable_m52, via_pointer.wall_ns);
        worst_stable_cpu_m52 = std::max(worst_stable_cpu_m52, via_pointer.cpu_ns);
      }
      report.rows.push_back(std::move(row));
    }
  }
  report.Add("updates_per_row", updates);
  report.Add("worst_stable_ns_m_le_52", worst_stable_m52);
  report.Add("worst_stable_cpu_ns_m_le_52", worst_stable_cpu_m52);
  report.notes.push_back("ns_per_update: wall time through SelectUpdate's function pointer (engine path); "
                         "cpu_ns_per_update: the same run in thread CPU time; "
                         "ns_per_update_inlined / cpu_ns_per_update_inlined: kernel inlined into the loop "
                         "(likelihood path); best of " +
                         std::to_string(reps) + " runs; target <= 15 ns for m <= 52");
  return report;
}

PLIMSOLL_BENCH("update", "one-step update: ns per observation per form and season length", RunUpdateBench);

}  // namespace
}  // namespace plimsoll::bench
