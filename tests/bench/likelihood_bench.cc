// EvaluateLikelihood cost, the inner loop of fitting: one call on n = 1000 observations with
// m = 24 per stable form (state copy + one pass), in microseconds per call and ns per observation.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <limits>
#include <vector>

#include "bench/bench.h"
#include "plimsoll/model/likelihood.h"
#include "plimsoll/model/simulate.h"

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
    const std::vector<double> y = model::SimulateSeries(spec, params, init,
                                                        spec.error == model::ErrorType::kAdditive ? 4.0 : 0.0004, n, 3);
    double best = std::numeric_limits<double>::infinity();
    for (int rep = 0; rep < 3; ++rep) {
      double sink = 0.0;
      auto start = std::chrono::steady_clock::now();
      for (int c = 0; c < calls; ++c) {
        auto r = model::EvaluateLikelihood(spec, params, init, y);
        sink += r.ok() ? r->loglik : 0.0;
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
    report.rows.push_back(std::move(row));
  }
  report.notes.push_back("wall time, best of 3 runs; each call copies the initial state and makes one pass");
  return report;
}

PLIMSOLL_BENCH("likelihood", "EvaluateLikelihood per call, n = 1000, m = 24, stable forms", RunLikelihoodBench);

}  // namespace
}  // namespace plimsoll::bench
