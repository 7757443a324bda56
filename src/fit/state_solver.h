#pragma once
// Concentrating the initial state out of the likelihood (internal to the fit module).
//
// For fixed smoothing parameters, the best initial state (level, trend, m - 1 free seasonal
// states) is found by Gauss-Newton on the concentrated -loglik, with the Jacobian of the
// innovations with respect to the initial state propagated through the recursion (tangent-linear
// pass, O(n p) for p free states) and a backtracking line search on model::EvaluateLikelihood.
// For additive error with additive trend and season the innovations are affine in the initial
// state, so one full step is the exact least-squares optimum. With relative errors and additive
// components the one-step forecasts mu are still affine in the initial state (the state update
// is driven by y - mu as with additive errors), so after one tangent pass every Gauss-Newton step
// and line-search trial is computed from mu = mu0 + J_mu delta without another pass over the
// recursion. A multiplicative season needs a tangent pass per step. The optimiser then only
// searches the 1-4 smoothing parameters.
//
// Additive season without gaps: the tangent recursion is then time-invariant in the frame that
// rotates with the season, and seasonal state j is first read at step j, so its Jacobian column
// is the first seasonal state's column shifted down by j. One tangent pass with three columns
// (level, trend, first seasonal state) gives them all; for additive error J'J and J'r are lag
// sums of those columns (O(n m) instead of O(n m^2)).
//
// Thread-safety: one solver per fit (it owns scratch space); no shared state.

#include <Eigen/Core>

#include <cstddef>
#include <new>
#include <span>
#include <vector>

#include "plimsoll/model/params.h"
#include "plimsoll/model/spec.h"
#include "plimsoll/model/state.h"

namespace plimsoll::fit {

// Allocates on 64-byte boundaries, so the tangent pass may use aligned 4- and 8-wide loads and stores.
template <typename T>
struct Aligned64Allocator {
  using value_type = T;
  Aligned64Allocator() = default;
  template <typename U>
  explicit Aligned64Allocator(const Aligned64Allocator<U>&) {}
  T* allocate(size_t n) { return static_cast<T*>(::operator new(n * sizeof(T), std::align_val_t{64})); }
  void deallocate(T* p, size_t) { ::operator delete(p, std::align_val_t{64}); }
  friend bool operator==(const Aligned64Allocator&, const Aligned64Allocator&) { return true; }
};
using AlignedVector = std::vector<double, Aligned64Allocator<double>>;

class StateSolver {
 public:
  // True for the forms the tangent pass implements: trend N/A/Ad, season N/A/M, either error.
  static bool Supports(const model::ModelSpec& spec);

  // True when the innovations are affine in the state (additive error, additive components):
  // Solve is then exact in one step whatever the starting state.
  bool affine() const;
  // True when the one-step forecasts are affine in the state but the likelihood is not a sum of
  // squares (relative error, additive components).
  bool affine_mu() const;

  // REQUIRES Supports(spec); y outlives the solver. With estimate_season false the seasonal
  // states are held at their starting values (only level and trend are solved for).
  StateSolver(const model::ModelSpec& spec, std::span<const double> y, bool estimate_season);

  // Improves `state` (level, trend, season in chronological order, normalised) for `params` in
  // place and returns the -loglik there; +infinity when the starting state is infeasible.
  // Likelihood passes (tangent and plain) are added to *passes.
  // With coarse, a form whose solve is iterative (relative error or multiplicative season) takes
  // one Gauss-Newton step only: the value is then an upper bound of the profile (a probe's
  // screening value).
  double Solve(const model::Params& params, double& level, double& trend, std::vector<double>& season_chrono,
               int* passes, bool coarse = false);

  // The gradient of -loglik at (params, state) with respect to (alpha, beta, gamma, phi) with the
  // state held fixed (zero for parameters the form lacks); one pass over the history. At the
  // state Solve returns this is the gradient of the profile (envelope theorem: the state's own
  // gradient is zero there). False when the state is infeasible or the gradient not finite.
  bool ParamGradient(const model::Params& params, double level, double trend, const std::vector<double>& season_chrono,
                       double grad[4]);

 private:
  // -loglik at the given state, +infinity when infeasible.
  double Objective(const model::Params& params, double level, double trend, const std::vector<double>& season);
  // J'r (first p entries of jr_) after Tangents without mu_rows: summed by the tangent pass
  // while the rows are in registers, instead of a second sweep over the n x p rows.
  Eigen::VectorXd JacobianTimesResiduals() const {
    return Eigen::Map<const Eigen::VectorXd>(jr_.data(), p_);
  }
  // J'J of the Jacobian's p columns, lower triangle (AVX-512 or AVX2 kernel where the CPU has it;
  // both give the same bits).
  Eigen::MatrixXd Gram(const AlignedVector& rows) const;
  // Fills jacobian_ (rows = observations, p columns), residuals_, jr_, grad_log_mu_ and
  // tangent_objective_ (-loglik at the state, +infinity when not finite); with mu_rows
  // (affine_mu() forms only) instead rows of d mu / d state for every step and mu0_.
  // With impulse (shifted_ only) the rows have 4 columns (level, trend, the first seasonal state,
  // a zero pad) in impulse_.
  bool Tangents(const model::Params& params, double level, double trend, const std::vector<double>& season,
                bool mu_rows = false, bool impulse = false);
  // Solve for affine() forms when shifted_: the Gram and J'r from lag sums of three columns.
  double SolveShifted(const model::Params& params, double& level, double& trend, std::vector<double>& season,
                      int* passes);
  // shifted_ only, after an impulse pass: the first seasonal state's column reversed, followed by
  // m zeros, at the start of columns_ (row t's seasonal part is then a contiguous run).
  void ReverseSeasonalImpulse();
  // scaled_ rows (shifted_ only: no gaps, row t = step t): row t of J in the free coordinates
  // times scale[t], from the impulse columns.
  void ScaledRowsFromImpulse(const double* scale);
  // Solve for affine_mu() forms: Gauss-Newton on mu = mu0 + J_mu delta after one tangent pass.
  double SolveAffineMu(const model::Params& params, double& level, double& trend, std::vector<double>& season,
                       int* passes, bool coarse);
  // -loglik of a relative-error form from its one-step forecasts (every step); +infinity when one
  // is outside (1e-300, 1e300) as in model::EvaluateLikelihood.
  // Also stores 1 / mu_t and the relative residuals (0 for gaps) up to the first infeasible step.
  double MuObjective(const double* mu, double* inv_mu, double* resid) const;
  // (l, b, s) = the state (level, trend, season) moved by lambda * delta in the free coordinates,
  // the last seasonal state keeping the normalisation.
  void Displace(const Eigen::VectorXd& delta, double lambda, double level, double trend,
                const std::vector<double>& season, double& l, double& b, std::vector<double>& s) const;
  // Affine solves: moves the state by the full step `delta` when its SSE beats the start's, and
  // returns the concentrated -loglik at the SSE kept (+infinity unless positive and finite).
  double TakeAffineStep(const Eigen::VectorXd& delta, double sse, double sse_start, double& level, double& trend,
                        std::vector<double>& season);

  model::ModelSpec spec_;
  std::span<const double> y_;
  bool estimate_season_;
  int p_ = 0;       // free state coordinates
  bool wide_ = false;  // AVX-512 and more than 4 columns: rows of a multiple of 8, 8-wide passes
  int pp_ = 0;      // p_ rounded up to a multiple of 4 (8 when wide_): the row stride
  int n_obs_ = 0;   // non-missing observations
  AlignedVector jacobian_;            // n_obs x pp, row-major: d residual_t / d state
  std::vector<double> residuals_;     // n_obs
  AlignedVector grad_log_mu_;         // pp: d sum log mu_t / d state (relative error only)
  AlignedVector jr_;                  // pp: J'r of the last Tangents (not mu_rows), made by the pass
  AlignedVector t_level_, t_trend_, t_season_;  // tangents of the state, pp per state
  AlignedVector t_param_season_;                       // 4 per slot: seasonal tangents to the parameters
  std::vector<double> season_work_, trial_season_;
  mutable std::vector<double> gram_;  // pp x pp scratch of Gram()
  double tangent_objective_ = 0.0;    // -loglik at the state of the last Tangents (not mu_rows)
  // affine_mu() forms: forecasts at the start state, per step; forecasts now, trial ones, J_mu delta.
  // row_scale_: d r / d mu per step at the last Gram refresh (shifted_).
  std::vector<double> mu0_, mu_, trial_mu_, jd_, weights_, inv_mu_, trial_inv_mu_, resid_, trial_resid_, row_scale_;
  AlignedVector scaled_;              // n_obs x pp: rows of J_mu scaled by d residual / d mu
  std::vector<double> padded_;        // pp: a step in the free coordinates, zero-padded; J_mu'w
  // Additive season estimated, no gaps: seasonal columns are shifts of one (see SolveShifted).
  bool shifted_ = false;
  size_t lag_width_ = 0;              // m rounded up to a multiple of 4
  AlignedVector impulse_;             // n x 4 rows: level, trend, first seasonal state, pad
  std::vector<double> columns_, lags_, jd_shift_;  // zero-padded columns, their lag sums, r + J delta
  std::vector<double> shift_;         // m: the raw seasonal step (free coordinates and the last state)
};

}  // namespace plimsoll::fit
