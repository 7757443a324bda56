// EvaluateLikelihood cost, the inner loop of fitting: one call on n = 1000 observations with
// m = 24 per stable form (state copy + one pass), in microseconds per call and ns per observation.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <limits>
#include <vector>

#include "bench/bench.h"
#include "plimsoll/model/likelihood.h"

namespace plimsoll::bench {
namespace {

BenchReport RunLikelihoodBench(const BenchArgs& args) {
  const int n = 1000;
  const int m = 24;
  const int calls = args.quick ? 50 : 2000;
  const model::Params params{0.3, 0.05, 0.1, 0.95};
  BenchReport report;
  for (const model::ModelSpec& spec : model::DefaultCandidates(m, true)) {
    std::vector<double> season(spec.has_season() ? m : 0);
    for (int k = 0; k < static_cast<int>(season.size()); ++k) {
      const double wave = std::sin(6.283185307179586 * k / m);
      season[static_cast<size_t>(k)] = spec.season == model::SeasonType::kMultiplicative ? 1.0 + 0.1 * wave : 10.0 * wave;
    }
    const model::State init = model::MakeState(100.0, 0.1, season);
    // A positive seasonal stream with noise (a simulated multiplicative-error series with a
    // random-walk trend can drift below zero over 1000 steps, which the likelihood refuses).
    std::vector<double> y(static_cast<size_t>(n));
    uint64_t x = 0x9e3779b97f4a7c15ull;
    for (int t = 0; t < n; ++t) {
      x ^= x << 13;
      x ^= x >> 7;
      x ^= x << 17;
      const double noise = static_cast<double>(x >> 11) * 0x1.0p-53 - 0.5;
      y[static_cast<size_t>(t)] = 100.0 + 10.0 * std::sin(6.283185307179586 * (t % m) / m) + 4.0 * noise;
    }
    int failures = 0;
    double best = std::numeric_limits<double>::infinity();
    for (int rep = 0; rep < 3; ++rep) {
      double sink = 0.0;
      auto start = std::chrono::steady_clock::now();
      for (int c = 0; c < calls; ++c) {
        auto r = model::EvaluateLikelihood(spec, params, init, y);
        if (r.ok()) {
          sink += r->loglik;
        } else {
          ++failures;
        }
      }
      const double us = std::chrono::duration<double, std::micro>(std::chrono::steady_clock::now() - start).count();
      KeepAlive(sink);
      best = std::min(best, us / calls);
    }
    BenchFields row;
    row.emplace_back("form", spec.Notation());
    row.emplace_back("m", int64_t{m});
    row.emplace_back("n", int64_t{n});
    row.emplace_back("us_per_call", best);
    row.emplace_back("ns_per_observation", best * 1000.0 / n);
    row.emplace_back("failed_calls", int64_t{failures});
    report.rows.push_back(std::move(row));
  }
  report.notes.push_back("wall time, best of 3 runs; each call copies the initial state and makes one pass");
  return report;
}

PLIMSOLL_BENCH("likelihood", "EvaluateLikelihood per call, n = 1000, m = 24, stable forms", RunLikelihoodBench);

}  // namespace
}  // namespace plimsoll::bench
