// Concentrated Gaussian log-likelihood and information criteria.
#include "plimsoll/model/likelihood.h"

#include <bit>
#include <cmath>
#include <limits>
#include <numbers>
#include <string>

#include "model/update_kernels.h"

namespace plimsoll::model {
namespace {

// |mu| is kept inside this range for M-error forms so the running product of mu below can
// neither overflow nor go subnormal between renormalisations.
constexpr double kMuFloor = 1e-300;
constexpr double kMuCeiling = 1e300;

Status BadMu(int64_t step, double mu, bool positive) {
  std::string what = !std::isfinite(mu) ? "is not finite"
                     : positive         ? "is not positive (the form needs positive forecasts)"
                                        : "is outside [1e-300, 1e300]";
  return Status::NumericFailure("step " + std::to_string(step) + ": one-step forecast mu = " + std::to_string(mu) +
                                " " + what);
}

// Splits x (normal, positive) into mantissa in [1, 2) and a binary exponent: the sum of
// log|mu_t| is accumulated as a product so the loop needs no log per step.
inline double Renormalise(double x, int64_t& exponent) {
  uint64_t bits = std::bit_cast<uint64_t>(x);
  exponent += static_cast<int64_t>((bits >> 52) & 0x7ff) - 1023;
  bits = (bits & ~(uint64_t{0x7ff} << 52)) | (uint64_t{1023} << 52);
  return std::bit_cast<double>(bits);
}

template <typename K, bool kTrace>
Result<LikelihoodResult> Run(const Params& params, const State& initial, std::span<const double> y,
                             const LikelihoodTrace& trace) {
  constexpr bool kMultError = K::kError == ErrorType::kMultiplicative;
  LikelihoodResult out;
  out.final_state = initial;
  State& st = out.final_state;
  double sse = 0.0;
  double mu_product = 1.0;
  int64_t mu_exponent = 0;
  int n = 0;
  const size_t len = y.size();
  for (size_t i = 0; i < len; ++i) {
    const StepResult r = K::Step(params, st, y[i]);
    if constexpr (kTrace) {
      if (trace.fitted) (*trace.fitted)[i] = r.mu;
      if (trace.residuals) (*trace.residuals)[i] = r.innovation;
    }
    bool bad;
    if constexpr (kMultError) {
      bad = !(r.mu > kMuFloor && r.mu < kMuCeiling);
    } else if constexpr (K::kNeedsPositive) {
      bad = !(r.mu > 0.0 && r.mu < std::numeric_limits<double>::infinity());
    } else {
      bad = !std::isfinite(r.mu);
    }
    if (bad) [[unlikely]] return BadMu(static_cast<int64_t>(i), r.mu, K::kNeedsPositive);
    if (std::isnan(y[i])) continue;
    sse += r.innovation * r.innovation;
    ++n;
    if constexpr (kMultError) mu_product = Renormalise(mu_product * r.mu, mu_exponent);
  }
  if (n == 0) return Status::InvalidArgument("no observations: every value is missing");
  if (!std::isfinite(sse)) return Status::NumericFailure("sum of squared innovations is not finite");
  if (!(sse > 0.0)) return Status::NumericFailure("innovation variance is zero: the form fits exactly");
  out.n = n;
  out.sse = sse;
  out.sigma2 = sse / n;
  if constexpr (kMultError) out.sum_log_abs_mu = std::log(mu_product) + static_cast<double>(mu_exponent) * std::numbers::ln2;
  out.loglik = -0.5 * n * (std::log(2.0 * std::numbers::pi * out.sigma2) + 1.0) - out.sum_log_abs_mu;
  st.sigma2 = out.sigma2;
  return out;
}

}  // namespace

Result<LikelihoodResult> EvaluateLikelihood(const ModelSpec& spec, const Params& params, const State& initial,
                                            std::span<const double> y, LikelihoodTrace trace) {
  if (spec.has_season() && initial.season.size() != static_cast<size_t>(spec.period)) {
    return Status::InvalidArgument("initial state has " + std::to_string(initial.season.size()) +
                                   " seasonal values; " + spec.Notation() + " with period " +
                                   std::to_string(spec.period) + " needs " + std::to_string(spec.period));
  }
  if (spec.has_season() && initial.head >= initial.season.size()) {
    return Status::InvalidArgument("initial state ring head is outside the season");
  }
  const bool tracing = trace.fitted != nullptr || trace.residuals != nullptr;
  if (trace.fitted) trace.fitted->assign(y.size(), std::numeric_limits<double>::quiet_NaN());
  if (trace.residuals) trace.residuals->assign(y.size(), std::numeric_limits<double>::quiet_NaN());
  return internal::DispatchForm(spec, [&]<typename K>(K) {
    return tracing ? Run<K, true>(params, initial, y, trace) : Run<K, false>(params, initial, y, trace);
  });
}

InformationCriteria Criteria(double loglik, int n, int k) {
  InformationCriteria c;
  c.aic = -2.0 * loglik + 2.0 * k;
  c.aicc = (n - k - 1 > 0) ? c.aic + 2.0 * k * (k + 1) / static_cast<double>(n - k - 1)
                           : std::numeric_limits<double>::infinity();
  c.bic = -2.0 * loglik + k * std::log(static_cast<double>(n));
  return c;
}

int CountParameters(const ModelSpec& spec) {
  int k = 1 + 1 + 1;  // alpha, initial level, sigma^2
  if (spec.has_trend()) k += 2;  // beta, initial trend
  if (spec.damped()) k += 1;
  if (spec.has_season()) k += 1 + (spec.period - 1);
  return k;
}

}  // namespace plimsoll::model
