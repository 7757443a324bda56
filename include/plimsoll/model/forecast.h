#pragma once
// h-step forecast distributions and the one-step band used for flagging.
//
// Analytic where published results give it:
//  - class 1, linear homoscedastic (A error; trend N/A/Ad; season N/A): v_h = s2 (1 + sum c_j^2),
//    c_j = w' F^{j-1} g (Hyndman, Koehler, Ord & Snyder 2008, ch. 6);
//  - class 2, M error with linear states (trend N/A/Ad; season N/A): theta recursion of
//    Hyndman, Koehler, Ord & Snyder (2005), J. Forecasting 24, 17-37.
// Every other form: simulated sample paths (seeded, reproducible), quantiles from the paths.
//
// Thread-safety: pure functions.

#include <cstdint>
#include <span>
#include <vector>

#include "plimsoll/base/status.h"
#include "plimsoll/model/params.h"
#include "plimsoll/model/spec.h"
#include "plimsoll/model/state.h"

namespace plimsoll::model {

enum class VarianceMethod : uint8_t { kAnalytic = 0, kSimulated = 1 };

struct ForecastOptions {
  int horizon = 24;                        // steps ahead, >= 1
  std::vector<double> levels = {80, 95};   // two-sided interval levels in percent, each in (0, 100)
  int paths = 5000;                        // sample paths when simulation is needed
  uint64_t seed = 42;                      // simulation seed: same inputs, same output
  bool force_simulation = false;           // simulate even where analytic results exist (tests)
};

struct Interval {
  double level;  // percent
  double lower;
  double upper;
};

struct ForecastStep {
  int h;
  double mean;      // analytic mean (point forecast for linear forms; simulated mean otherwise)
  double variance;
  std::vector<Interval> intervals;  // one per requested level, same order
};

struct ForecastResult {
  VarianceMethod method;
  std::vector<ForecastStep> steps;
};

// Uses state.sigma2 as the innovation variance. Analytic forms: mean = point forecast,
// intervals mean +/- z sqrt(v_h) (for class 2 this is the usual normal approximation).
// Simulated forms: mean and variance of the paths, interval ends are linear-interpolation
// quantiles of the sorted paths. Fails with InvalidArgument for a bad horizon (1..100000),
// level, paths (2..1e7, only checked when simulating), sigma2 < 0 or a state whose season length
// is not the spec's period.
Result<ForecastResult> Forecast(const ModelSpec& spec, const Params& params, const State& state,
                                const ForecastOptions& options);

// Analytic variances for classes 1 and 2, h = 1..horizon; NotFound for other forms.
Result<std::vector<double>> AnalyticVariances(const ModelSpec& spec, const Params& params, const State& state,
                                              int horizon);

// The exact one-step band at two-sided level `level` (percent) around forecast mu:
// mu +/- z sigma (A error), mu (1 +/- z sigma) (M error), z the standard normal quantile.
struct Band {
  double lower;
  double upper;
};
Band OneStepBand(const ModelSpec& spec, double mu, double sigma2, double z);

// Standard normal quantile (inverse CDF), accurate to ~1e-15 relative. REQUIRES 0 < p < 1.
double NormalQuantile(double p);
// z for a two-sided level in percent: NormalQuantile(0.5 + level / 200).
double TwoSidedZ(double level_percent);

}  // namespace plimsoll::model
