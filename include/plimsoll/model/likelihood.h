#pragma once
// Exact Gaussian log-likelihood of a series under a form, parameters and initial state, with
// sigma^2 at its maximum (concentrated), and information criteria.
//
// loglik = -(n/2) [ln(2 pi s2) + 1] - sum ln|mu_t| (M error only), s2 = mean(innovation^2),
// n = number of non-missing observations (2008 book, ch. 5). Missing (NaN) observations advance
// the state by prediction and do not count in n.
//
// Thread-safety: pure functions.

#include <span>
#include <vector>

#include "plimsoll/base/status.h"
#include "plimsoll/model/params.h"
#include "plimsoll/model/spec.h"
#include "plimsoll/model/state.h"

namespace plimsoll::model {

struct LikelihoodResult {
  double loglik = 0.0;
  double sigma2 = 0.0;        // maximum-likelihood innovation variance
  double sse = 0.0;           // sum of squared innovations
  double sum_log_abs_mu = 0.0;
  int n = 0;                  // non-missing observations
  State final_state;          // state after the last observation
};

// Optional per-step outputs; each vector, when non-null, is resized to y.size().
struct LikelihoodTrace {
  std::vector<double>* fitted = nullptr;     // mu_t
  std::vector<double>* residuals = nullptr;  // innovation (relative for M error)
};

// Fails with NumericFailure naming the step when mu is non-finite, or <= 0 for a form that
// needs positive data (M error: also |mu| outside [1e-300, 1e300], which keeps the log|mu| sum
// exact without a log per step), and when every innovation is zero (sigma^2 = 0);
// InvalidArgument when there are no observations or the initial state's season length is not
// the spec's period. On success final_state.sigma2 is the maximum-likelihood sigma^2.
Result<LikelihoodResult> EvaluateLikelihood(const ModelSpec& spec, const Params& params, const State& initial,
                                            std::span<const double> y, LikelihoodTrace trace = {});

struct InformationCriteria {
  double aic;
  double aicc;  // infinite when n - k - 1 <= 0
  double bic;
};

// AIC = -2 logL + 2k; AICc = AIC + 2k(k+1)/(n-k-1); BIC = -2 logL + k ln n.
// k counts estimated smoothing parameters, free initial states (level, trend, m-1 seasonal:
// seasonal initial states are normalised) and 1 for sigma^2; see CountParameters.
InformationCriteria Criteria(double loglik, int n, int k);

// k for a form with every parameter and initial state estimated:
// alpha (+beta with trend) (+gamma with season) (+phi if damped) + 1 level (+1 trend)
// (+ m-1 seasonal) + 1 sigma^2.
int CountParameters(const ModelSpec& spec);

}  // namespace plimsoll::model
