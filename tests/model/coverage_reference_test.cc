// Monte-Carlo coverage: intervals from Forecast cover futures simulated from the model itself
// at the nominal rate, for every form. Futures use seeds disjoint from the forecast's own
// simulation seed, so simulated intervals are not judged on the paths that built them.
#include <catch2/catch.hpp>

#include <cmath>
#include <vector>

#include "plimsoll/model/forecast.h"
#include "plimsoll/model/simulate.h"

namespace plimsoll::model {
namespace {

constexpr int kFutures = 20000;
constexpr int kForecastPaths = 20000;
constexpr int kHorizon = 12;

State CoverageState(const ModelSpec& spec, double sigma2) {
  std::vector<double> season;
  for (int k = 0; k < (spec.has_season() ? spec.period : 0); ++k) {
    const double wave = std::cos(1.3 * k);
    season.push_back(spec.season == SeasonType::kMultiplicative ? 1.0 + 0.15 * wave : 15.0 * wave);
  }
  return MakeState(100.0, spec.multiplicative_trend() ? 1.01 : 1.0, season, sigma2);
}

TEST_CASE("forecast intervals cover simulated futures at the nominal rate for every form",
          "[model][reference]") {
  const Params params{0.3, 0.05, 0.1, 0.9};
  for (const ModelSpec& spec : AllForms(4)) {
    // Relative innovations for M error; absolute (on a level of 100) for A error.
    const double sigma2 = spec.error == ErrorType::kAdditive ? 4.0 : 0.0004;
    const State state = CoverageState(spec, sigma2);
    ForecastOptions options;
    options.horizon = kHorizon;
    options.levels = {80, 95};
    options.paths = kForecastPaths;
    options.seed = 7;
    auto forecast = Forecast(spec, params, state, options);
    REQUIRE(forecast.ok());
    const bool simulated = forecast->method == VarianceMethod::kSimulated;

    std::vector<std::vector<double>> futures;
    futures.reserve(kFutures);
    for (int i = 0; i < kFutures; ++i) {
      futures.push_back(SimulateSeries(spec, params, state, sigma2, kHorizon, 1'000'000 + static_cast<uint64_t>(i)));
    }
    for (int h : {1, 6, kHorizon}) {
      for (size_t k = 0; k < options.levels.size(); ++k) {
        const Interval& iv = forecast->steps[static_cast<size_t>(h - 1)].intervals[k];
        int inside = 0;
        for (const auto& f : futures) inside += (f[h - 1] >= iv.lower && f[h - 1] <= iv.upper) ? 1 : 0;
        const double nominal = iv.level / 100.0;
        const double coverage = static_cast<double>(inside) / kFutures;
        // Binomial standard error of the coverage estimate; simulated intervals add the
        // sampling error of their own quantiles (same order, from kForecastPaths paths).
        double var = nominal * (1 - nominal) / kFutures;
        if (simulated) var += nominal * (1 - nominal) / kForecastPaths;
        INFO(spec.Notation() << (simulated ? " (simulated)" : " (analytic)") << " h=" << h << " level "
                             << iv.level << ": coverage " << coverage);
        CHECK(std::abs(coverage - nominal) <= 3 * std::sqrt(var));
      }
    }
  }
}

}  // namespace
}  // namespace plimsoll::model
