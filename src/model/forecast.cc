// h-step forecast distributions: analytic (classes 1 and 2) or simulated sample paths.
#include "plimsoll/model/forecast.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>
#include <string>

#include "model/normal_source.h"
#include "model/state_space.h"
#include "model/update_kernels.h"
#include "plimsoll/model/update.h"

namespace plimsoll::model {
namespace {

constexpr int kMaxHorizon = 100000;
constexpr int kMaxPaths = 10'000'000;

bool LinearStates(const ModelSpec& spec) {
  return !spec.multiplicative_trend() && spec.season != SeasonType::kMultiplicative;
}

// c_j = w' F^{j-1} g for j = 1..count (2008 book, ch. 6).
std::vector<double> CCoefficients(const ModelSpec& spec, const Params& params, int count) {
  internal::StateSpace ss = internal::BuildStateSpace(spec, params);
  std::vector<double> c(static_cast<size_t>(std::max(count, 0)));
  Eigen::VectorXd v = ss.g;
  for (int j = 0; j < count; ++j) {
    c[static_cast<size_t>(j)] = ss.w.dot(v);
    v = ss.F * v;
  }
  return c;
}

Status ValidateState(const ModelSpec& spec, const State& state) {
  if (spec.has_season() && state.season.size() != static_cast<size_t>(spec.period)) {
    return Status::InvalidArgument("state has " + std::to_string(state.season.size()) + " seasonal values; " +
                                   spec.Notation() + " with period " + std::to_string(spec.period) + " needs " +
                                   std::to_string(spec.period));
  }
  if (spec.has_season() && state.head >= state.season.size()) {
    return Status::InvalidArgument("state ring head is outside the season");
  }
  if (!(state.sigma2 >= 0.0) || !std::isfinite(state.sigma2)) {
    return Status::InvalidArgument("state sigma2 " + std::to_string(state.sigma2) + " is not a finite value >= 0");
  }
  return Status::Ok();
}

// Linear-interpolation quantile of sorted samples (p in [0, 1]).
double SortedQuantile(const std::vector<double>& sorted, double p) {
  const double pos = p * static_cast<double>(sorted.size() - 1);
  const size_t lo = static_cast<size_t>(std::floor(pos));
  const size_t hi = std::min(lo + 1, sorted.size() - 1);
  const double frac = pos - static_cast<double>(lo);
  return sorted[lo] + frac * (sorted[hi] - sorted[lo]);
}

// samples[h * paths + p]: simulated observation h+1 steps ahead on path p.
std::vector<double> SimulatePaths(const ModelSpec& spec, const Params& params, const State& state, int horizon,
                                  int paths, uint64_t seed) {
  std::vector<double> samples(static_cast<size_t>(horizon) * static_cast<size_t>(paths));
  internal::NormalSource normal(seed);
  const double sigma = std::sqrt(state.sigma2);
  State work = state;
  internal::DispatchForm(spec, [&]<typename K>(K) {
    for (int p = 0; p < paths; ++p) {
      work.level = state.level;
      work.trend = state.trend;
      work.head = state.head;
      std::copy(state.season.begin(), state.season.end(), work.season.begin());
      for (int h = 0; h < horizon; ++h) {
        samples[static_cast<size_t>(h) * paths + p] = K::Simulate(params, work, sigma * normal.Next());
      }
    }
  });
  return samples;
}

}  // namespace

Result<std::vector<double>> AnalyticVariances(const ModelSpec& spec, const Params& params, const State& state,
                                              int horizon) {
  if (!LinearStates(spec)) {
    return Status::NotFound(spec.Notation() + " has no analytic forecast variance; simulate instead");
  }
  if (horizon < 1 || horizon > kMaxHorizon) {
    return Status::InvalidArgument("horizon " + std::to_string(horizon) + " is not in [1, " +
                                   std::to_string(kMaxHorizon) + "]");
  }
  PLIMSOLL_RETURN_IF_ERROR(ValidateState(spec, state));
  const double s2 = state.sigma2;
  const std::vector<double> c = CCoefficients(spec, params, horizon - 1);
  std::vector<double> v(static_cast<size_t>(horizon));
  if (spec.error == ErrorType::kAdditive) {
    // Class 1: v_h = s2 (1 + sum_{j<h} c_j^2).
    double acc = 1.0;
    for (int h = 1; h <= horizon; ++h) {
      v[static_cast<size_t>(h - 1)] = s2 * acc;
      if (h < horizon) acc += c[static_cast<size_t>(h - 1)] * c[static_cast<size_t>(h - 1)];
    }
    return v;
  }
  // Class 2 (Hyndman, Koehler, Ord & Snyder 2005): theta_1 = mu_1^2,
  // theta_h = mu_h^2 + s2 sum_{j=1}^{h-1} c_j^2 theta_{h-j}; v_h = (1 + s2) theta_h - mu_h^2.
  std::vector<double> theta(static_cast<size_t>(horizon));
  for (int h = 1; h <= horizon; ++h) {
    const double mu = PointForecast(spec, params, state, h);
    double sum = 0.0;
    for (int j = 1; j < h; ++j) sum += c[static_cast<size_t>(j - 1)] * c[static_cast<size_t>(j - 1)] * theta[static_cast<size_t>(h - j - 1)];
    theta[static_cast<size_t>(h - 1)] = mu * mu + s2 * sum;
    v[static_cast<size_t>(h - 1)] = (1.0 + s2) * theta[static_cast<size_t>(h - 1)] - mu * mu;
  }
  return v;
}

Result<ForecastResult> Forecast(const ModelSpec& spec, const Params& params, const State& state,
                                const ForecastOptions& options) {
  if (options.horizon < 1 || options.horizon > kMaxHorizon) {
    return Status::InvalidArgument("forecast horizon " + std::to_string(options.horizon) + " is not in [1, " +
                                   std::to_string(kMaxHorizon) + "]");
  }
  for (double level : options.levels) {
    if (!(level > 0.0 && level < 100.0)) {
      return Status::InvalidArgument("interval level " + std::to_string(level) + " is not in (0, 100) percent");
    }
  }
  PLIMSOLL_RETURN_IF_ERROR(ValidateState(spec, state));
  const int horizon = options.horizon;
  ForecastResult out;
  out.steps.resize(static_cast<size_t>(horizon));

  if (LinearStates(spec) && !options.force_simulation) {
    Result<std::vector<double>> var = AnalyticVariances(spec, params, state, horizon);
    if (!var.ok()) return var.status();
    out.method = VarianceMethod::kAnalytic;
    for (int h = 1; h <= horizon; ++h) {
      ForecastStep& step = out.steps[static_cast<size_t>(h - 1)];
      step.h = h;
      step.mean = PointForecast(spec, params, state, h);
      step.variance = (*var)[static_cast<size_t>(h - 1)];
      const double sd = std::sqrt(step.variance);
      for (double level : options.levels) {
        const double z = TwoSidedZ(level);
        step.intervals.push_back({level, step.mean - z * sd, step.mean + z * sd});
      }
    }
    return out;
  }

  if (options.paths < 2 || options.paths > kMaxPaths) {
    return Status::InvalidArgument("simulation paths " + std::to_string(options.paths) + " is not in [2, " +
                                   std::to_string(kMaxPaths) + "]");
  }
  out.method = VarianceMethod::kSimulated;
  const int paths = options.paths;
  std::vector<double> samples = SimulatePaths(spec, params, state, horizon, paths, options.seed);
  std::vector<double> sorted(static_cast<size_t>(paths));
  for (int h = 1; h <= horizon; ++h) {
    ForecastStep& step = out.steps[static_cast<size_t>(h - 1)];
    step.h = h;
    const double* row = samples.data() + static_cast<size_t>(h - 1) * paths;
    double sum = 0.0;
    for (int p = 0; p < paths; ++p) sum += row[p];
    const double mean = sum / paths;
    double ss = 0.0;
    for (int p = 0; p < paths; ++p) ss += (row[p] - mean) * (row[p] - mean);
    step.mean = mean;
    step.variance = ss / (paths - 1);
    std::copy(row, row + paths, sorted.begin());
    std::sort(sorted.begin(), sorted.end());
    for (double level : options.levels) {
      const double tail = (1.0 - level / 100.0) / 2.0;
      step.intervals.push_back({level, SortedQuantile(sorted, tail), SortedQuantile(sorted, 1.0 - tail)});
    }
  }
  return out;
}

Band OneStepBand(const ModelSpec& spec, double mu, double sigma2, double z) {
  const double sd = std::sqrt(sigma2);
  if (spec.error == ErrorType::kAdditive) return {mu - z * sd, mu + z * sd};
  const double a = mu * (1.0 - z * sd);
  const double b = mu * (1.0 + z * sd);
  return {std::min(a, b), std::max(a, b)};
}

// Acklam's rational approximation (relative error ~1.15e-9) refined by one Halley step on
// erfc, which brings it to full double precision.
double NormalQuantile(double p) {
  if (!(p > 0.0 && p < 1.0)) {
    if (p == 0.0) return -std::numeric_limits<double>::infinity();
    if (p == 1.0) return std::numeric_limits<double>::infinity();
    return std::numeric_limits<double>::quiet_NaN();
  }
  static constexpr double a[] = {-3.969683028665376e+01, 2.209460984245205e+02, -2.759285104469687e+02,
                                 1.383577518672690e+02,  -3.066479806614716e+01, 2.506628277459239e+00};
  static constexpr double b[] = {-5.447609879822406e+01, 1.615858368580409e+02, -1.556989798598866e+02,
                                 6.680131188771972e+01,  -1.328068155288572e+01};
  static constexpr double c[] = {-7.784894002430293e-03, -3.223964580411365e-01, -2.400758277161838e+00,
                                 -2.549732539343734e+00, 4.374664141464968e+00,  2.938163982698783e+00};
  static constexpr double d[] = {7.784695709041462e-03, 3.224671290700398e-01, 2.445134137142996e+00,
                                 3.754408661907416e+00};
  constexpr double kLow = 0.02425;
  double x;
  if (p < kLow) {
    const double q = std::sqrt(-2.0 * std::log(p));
    x = (((((c[0] * q + c[1]) * q + c[2]) * q + c[3]) * q + c[4]) * q + c[5]) /
        ((((d[0] * q + d[1]) * q + d[2]) * q + d[3]) * q + 1.0);
  } else if (p <= 1.0 - kLow) {
    const double q = p - 0.5;
    const double r = q * q;
    x = (((((a[0] * r + a[1]) * r + a[2]) * r + a[3]) * r + a[4]) * r + a[5]) * q /
        (((((b[0] * r + b[1]) * r + b[2]) * r + b[3]) * r + b[4]) * r + 1.0);
  } else {
    const double q = std::sqrt(-2.0 * std::log1p(-p));
    x = -(((((c[0] * q + c[1]) * q + c[2]) * q + c[3]) * q + c[4]) * q + c[5]) /
        ((((d[0] * q + d[1]) * q + d[2]) * q + d[3]) * q + 1.0);
  }
  // Halley step: e = Phi(x) - p, with Phi from erfc (accurate in both tails).
  const double e = 0.5 * std::erfc(-x / std::numbers::sqrt2) - p;
  const double u = e * std::sqrt(2.0 * std::numbers::pi) * std::exp(x * x / 2.0);
  return x - u / (1.0 + x * u / 2.0);
}

double TwoSidedZ(double level_percent) { return NormalQuantile(0.5 + level_percent / 200.0); }

}  // namespace plimsoll::model
