// Maximum-likelihood fitting of one form.
//
// Concentrated search (trends N/A/Ad, usual region): the optimiser sees only the 1-4 smoothing
// coordinates; the profile -loglik(theta) = min over the initial state is smooth, and its exact
// gradient costs one extra pass (envelope theorem: at the solved state the state's own gradient
// is zero, so d profile / d theta is the partial derivative there; StateSolver::ParamGradient).
// NLopt's LD_LBFGS (bounded limited-memory BFGS, Nocedal 1980 / Liu & Nocedal 1989 as
// implemented by Luksan) uses it: 10-30 evaluations per start where BOBYQA needed 40-80 per
// run plus restarts. Measured against NLopt's other gradient methods on the benchmark series
// (select bench data, same starts): LD_SLSQP and LD_MMA ended ETS(A,A,A) with beta on its lower
// bound, 0.8 below the optimum; LD_CCSAQ, LD_TNEWTON and LD_VAR2 reached the optimum of
// ETS(A,A,A) and ETS(A,Ad,A) with 25-45% more passes than LD_LBFGS. A gradient method stays in
// the basin its line searches lead to, so short BOBYQA probes with a wide trust region follow
// (see GradientSearch).
//
// Full search (other forms, admissible region): NLopt's BOBYQA (Powell 2009, "The BOBYQA
// algorithm for bound constrained optimization without derivatives"). Why this one:
//  - the problem is a box after reparametrisation (alpha, beta*, gamma*, phi; initial states
//    with generous boxes), which is exactly what BOBYQA handles natively;
//  - -loglik is smooth in the usual region, so a quadratic trust-region model converges in far
//    fewer evaluations than simplex methods (Nelder-Mead / Sbplx degrade quickly beyond ~10
//    dimensions, and a seasonal form with m = 24 has up to 29);
//  - no derivatives needed: the likelihood is a recursion, numerical gradients would cost
//    dim + 1 evaluations each and be noisy near the boundary.
// NLopt rescales each coordinate by its initial step, so the level (data units) and the
// smoothing parameters (unit interval) share one trust region sensibly.
#include "plimsoll/fit/fit.h"

#include <nlopt.hpp>

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <optional>
#include <string>
#include <vector>

#include "fit/fit_internal.h"
#include "fit/state_solver.h"
#include "plimsoll/fit/initial.h"

namespace plimsoll::fit {
namespace {

using model::ModelSpec;
using model::Params;
using model::State;

// Box margin of the reference library (alpha, beta*, gamma* in [1e-4, 1 - 1e-4]); also keeps
// every smoothing parameter strictly inside the usual region's open bounds.
constexpr double kEps = 1e-4;
constexpr double kPhiLow = 0.8;
constexpr double kPhiHigh = 0.98;
// Returned for infeasible points (non-finite likelihood, non-positive mu for a positive form,
// outside the admissible region). Finite so BOBYQA's quadratic model stays finite.
constexpr double kPenalty = 1e12;
// Initial states may move this many scale units from their heuristic values.
constexpr double kStateBox = 1e4;
// How often (in evaluations) the time budget is checked; a clock read per evaluation would
// cost more than the evaluation for short series.
constexpr int kClockEvery = 16;
// Screening run per extra start: this many evaluations per dimension plus a base.
constexpr int kScreenPerDim = 8;
constexpr int kScreenBase = 40;
// Length of the BOBYQA probe after the concentrated search's gradient runs (see GradientSearch):
// its initial model takes 2 dim + 1 evaluations, the rest are trust-region steps.
constexpr int kProbePerDim = 4;
constexpr int kProbeBase = 8;
// Restarts after the main run, while each still improves -loglik. Each uses a differently
// sized first trust region (scale of the initial steps): a restart shaped like the run that just
// stopped tends to stop at the same point, a wider or narrower one often gets past it.
constexpr int kMaxRestarts = 3;
constexpr std::array<double, kMaxRestarts + 1> kRestartStepScale = {1.0, 5.0, 0.2, 1.0};
// A gradient run that comes within this fraction of every box width of an earlier run's end
// point (and is no better there) is stopped as having joined that basin.
constexpr double kJoinRadius = 0.01;

struct Range {
  double lo;
  double hi;
};

Range Narrow(Range base, const ParamControl& c) {
  if (c.lower) base.lo = std::max(base.lo, *c.lower);
  if (c.upper) base.hi = std::min(base.hi, *c.upper);
  return base;
}

// Where smoothing parameter starts come from, in (alpha, beta*, gamma*, phi).
constexpr std::array<std::array<double, 4>, 6> kStarts = {{
    {0.5, 0.1, 0.1, 0.97},
    {0.9, 0.3, 0.3, 0.82},
    {0.1, 0.05, 0.05, 0.9},
    {0.95, 0.05, 0.9, 0.8},
    {0.3, 0.5, 0.5, 0.98},
    {0.05, 0.01, 0.01, 0.85},
}};

// The optimisation problem for one form: decodes the optimiser's vector into (Params, State),
// evaluates -loglik, remembers the best point.
class Problem {
 public:
  Problem(const ModelSpec& spec, std::span<const double> y, const FitOptions& options, const State& heuristic,
          double scale, const Clock& clock, int64_t deadline_nanos)
      : spec_(spec),
        y_(y),
        options_(options),
        heuristic_season_(model::SeasonChronological(heuristic)),
        clock_(clock),
        deadline_nanos_(deadline_nanos) {
    const bool admissible = options.region == model::ParamRegion::kAdmissible;
    const int m = spec.period;
    const bool mult_season = spec.season == model::SeasonType::kMultiplicative;
    estimate_season_ = spec.has_season() && m <= options.max_estimated_season;

    alpha_range_ = Narrow({kEps, admissible ? 2.0 - kEps : 1.0 - kEps}, options.alpha);
    beta_range_ = Narrow({0.0, admissible ? 4.0 - kEps : 1.0}, options.beta);
    gamma_range_ = Narrow({0.0, admissible ? 2.0 - kEps : 1.0}, options.gamma);
    if (admissible) {
      // Smallest beta and gamma of the usual boxes (kEps * kEps), so the admissible search
      // contains the usual one.
      beta_range_.lo = std::max(beta_range_.lo, kEps * kEps);
      gamma_range_.lo = std::max(gamma_range_.lo, kEps * kEps);
    }
    phi_range_ = Narrow({kPhiLow, kPhiHigh}, options.phi);
    if (!admissible) {
      // A fixed beta or gamma narrows alpha so that beta* and gamma* stay in their boxes.
      if (spec.has_trend() && options.beta.fixed) {
        alpha_range_.lo = std::max(alpha_range_.lo, *options.beta.fixed / (1.0 - kEps));
        alpha_range_.hi = std::min(alpha_range_.hi, *options.beta.fixed / kEps);
      }
      if (spec.has_season() && options.gamma.fixed) {
        alpha_range_.hi = std::min(alpha_range_.hi, 1.0 - *options.gamma.fixed / (1.0 - kEps));
        alpha_range_.lo = std::max(alpha_range_.lo, 1.0 - *options.gamma.fixed / kEps);
      }
    }

    // Appends one coordinate; returns its index. Steps are the initial trust-region radius.
    auto add = [&](double lo, double hi, double step) {
      lower_.push_back(lo);
      upper_.push_back(hi);
      step_.push_back(std::min(step, 0.5 * (hi - lo)));
      return static_cast<int>(lower_.size()) - 1;
    };
    if (!options.alpha.fixed) i_alpha_ = add(alpha_range_.lo, alpha_range_.hi, 0.05);
    if (spec.has_trend() && !options.beta.fixed) {
      // Usual region: the position between the lowest and highest beta allowed given alpha.
      i_beta_ = admissible ? add(beta_range_.lo, beta_range_.hi, 0.02) : add(0.0, 1.0, 0.05);
    }
    if (spec.has_season() && !options.gamma.fixed) {
      i_gamma_ = admissible ? add(gamma_range_.lo, gamma_range_.hi, 0.02) : add(0.0, 1.0, 0.05);
    }
    if (spec.damped() && !options.phi.fixed) i_phi_ = add(phi_range_.lo, phi_range_.hi, 0.01);
    level0_ = heuristic.level;
    trend0_ = heuristic.trend;
    level_scale_ = spec.needs_positive_data() ? std::max(scale, 1e-3 * std::fabs(level0_)) : scale;
    trend_scale_ = spec.multiplicative_trend() ? 0.01 : 0.1 * level_scale_;
    season_scale_ = mult_season ? std::max(0.01, std::min(0.1, scale / std::max(std::fabs(level0_), 1e-12))) : scale;
    i_level_ = add(-kStateBox, kStateBox, 0.2);
    if (spec.has_trend()) i_trend_ = add(-kStateBox, kStateBox, 0.2);
    if (estimate_season_) {
      i_season_ = static_cast<int>(lower_.size());
      for (int j = 0; j + 1 < m; ++j) add(-kStateBox, kStateBox, 0.2);
    }
    season_.resize(heuristic_season_.size());
  }

  bool estimate_season() const { return estimate_season_; }
  size_t dim() const { return lower_.size(); }
  // The smoothing coordinates (alpha, beta, gamma, phi; those estimated) come first.
  size_t smoothing_dim() const { return static_cast<size_t>(i_level_); }
  const std::vector<double>& lower() const { return lower_; }
  const std::vector<double>& upper() const { return upper_; }
  const std::vector<double>& step() const { return step_; }
  bool alpha_range_empty() const { return alpha_range_.lo > alpha_range_.hi; }

  // A start vector from method-form smoothing values (alpha, beta*, gamma*, phi) and the
  // heuristic state, clamped into the boxes.
  std::vector<double> StartPoint(const std::array<double, 4>& s) const {
    std::vector<double> z(dim(), 0.0);
    auto clamp_to = [&](int i, double v) {
      if (i >= 0) z[static_cast<size_t>(i)] = std::clamp(v, lower_[static_cast<size_t>(i)], upper_[static_cast<size_t>(i)]);
    };
    const bool admissible = options_.region == model::ParamRegion::kAdmissible;
    const double alpha = std::clamp(s[0], alpha_range_.lo, alpha_range_.hi);
    clamp_to(i_alpha_, alpha);
    clamp_to(i_beta_, admissible ? alpha * s[1] : s[1]);
    clamp_to(i_gamma_, admissible ? (1.0 - std::min(alpha, 1.0)) * s[2] : s[2]);
    clamp_to(i_phi_, s[3]);
    return z;  // state coordinates 0 = heuristic state
  }

  // The optimiser vector for a known point (the inverse of Decode), clamped into the boxes.
  std::vector<double> Encode(const Params& p, const State& st) const {
    std::vector<double> z(dim(), 0.0);
    auto put = [&](int i, double v) {
      if (i >= 0) z[static_cast<size_t>(i)] = std::clamp(v, lower_[static_cast<size_t>(i)], upper_[static_cast<size_t>(i)]);
    };
    const bool admissible = options_.region == model::ParamRegion::kAdmissible;
    put(i_alpha_, p.alpha);
    auto position = [](double v, double lo, double hi) { return hi > lo ? (v - lo) / (hi - lo) : 0.0; };
    put(i_beta_, admissible ? p.beta
                            : position(p.beta, std::max(beta_range_.lo, kEps * p.alpha),
                                       std::min(beta_range_.hi, (1.0 - kEps) * p.alpha)));
    put(i_gamma_, admissible ? p.gamma
                             : position(p.gamma, std::max(gamma_range_.lo, kEps * (1.0 - p.alpha)),
                                        std::min(gamma_range_.hi, (1.0 - kEps) * (1.0 - p.alpha))));
    put(i_phi_, p.phi);
    put(i_level_, (st.level - level0_) / level_scale_);
    put(i_trend_, (st.trend - trend0_) / trend_scale_);
    if (estimate_season_) {
      const std::vector<double> chrono = model::SeasonChronological(st);
      for (size_t j = 0; j + 1 < chrono.size(); ++j) {
        put(i_season_ + static_cast<int>(j), (chrono[j] - heuristic_season_[j]) / season_scale_);
      }
    }
    return z;
  }

  // Fills params_ and state_ from z. Returns false when z maps outside the region.
  bool Decode(const double* z) {
    const bool admissible = options_.region == model::ParamRegion::kAdmissible;
    Params& p = params_;
    p.alpha = i_alpha_ >= 0 ? z[i_alpha_] : *options_.alpha.fixed;
    p.beta = 0.0;
    p.gamma = 0.0;
    p.phi = 1.0;
    if (spec_.has_trend()) {
      if (i_beta_ < 0) {
        p.beta = *options_.beta.fixed;
      } else if (admissible) {
        p.beta = z[i_beta_];
      } else {
        // beta in [max(lo, eps alpha), min(hi, (1 - eps) alpha)]: with the default range this is
        // beta* in [eps, 1 - eps], the reference library's box.
        const double lo = std::max(beta_range_.lo, kEps * p.alpha);
        const double hi = std::min(beta_range_.hi, (1.0 - kEps) * p.alpha);
        if (hi < lo) return false;
        p.beta = lo + z[i_beta_] * (hi - lo);
      }
    }
    if (spec_.has_season()) {
      if (i_gamma_ < 0) {
        p.gamma = *options_.gamma.fixed;
      } else if (admissible) {
        p.gamma = z[i_gamma_];
      } else {
        const double lo = std::max(gamma_range_.lo, kEps * (1.0 - p.alpha));
        const double hi = std::min(gamma_range_.hi, (1.0 - kEps) * (1.0 - p.alpha));
        if (hi < lo) return false;
        p.gamma = lo + z[i_gamma_] * (hi - lo);
      }
    }
    if (spec_.damped()) p.phi = i_phi_ >= 0 ? z[i_phi_] : *options_.phi.fixed;

    const double level = level0_ + level_scale_ * z[i_level_];
    const double trend = spec_.has_trend() ? trend0_ + trend_scale_ * z[i_trend_] : 0.0;
    if (spec_.needs_positive_data() && !(level > 0)) return false;
    if (spec_.multiplicative_trend() && !(trend > 0)) return false;
    if (spec_.has_season()) {
      if (estimate_season_) {
        const bool mult = spec_.season == model::SeasonType::kMultiplicative;
        const size_t m = season_.size();
        double sum = 0.0;
        for (size_t j = 0; j + 1 < m; ++j) {
          season_[j] = heuristic_season_[j] + season_scale_ * z[static_cast<size_t>(i_season_) + j];
          sum += season_[j];
          if (mult && !(season_[j] > 0)) return false;
        }
        // Normalisation: sum 0 (additive) or mean 1 (multiplicative).
        season_[m - 1] = (mult ? static_cast<double>(m) : 0.0) - sum;
        if (mult && !(season_[m - 1] > 0)) return false;
      } else {
        season_ = heuristic_season_;
      }
    }
    state_ = model::MakeState(level, trend, season_);
    if (admissible && !model::CheckParams(spec_, p, model::ParamRegion::kAdmissible).ok()) return false;
    return true;
  }

  // d(-loglik)/dz for the smoothing coordinates (usual region), from the gradient `g` in
  // (alpha, beta, gamma, phi) at the point z: the chain rule through Decode's mapping (beta and
  // gamma are positions between bounds that move with alpha).
  void SmoothingGradient(const double* z, const double g[4], double* out) const {
    const double alpha = i_alpha_ >= 0 ? z[i_alpha_] : *options_.alpha.fixed;
    double d_alpha = g[0];
    if (i_beta_ >= 0) {
      const bool lo_moves = kEps * alpha > beta_range_.lo, hi_moves = (1.0 - kEps) * alpha < beta_range_.hi;
      const double lo = lo_moves ? kEps * alpha : beta_range_.lo;
      const double hi = hi_moves ? (1.0 - kEps) * alpha : beta_range_.hi;
      const double zb = z[i_beta_];
      d_alpha += g[1] * ((lo_moves ? kEps : 0.0) * (1.0 - zb) + (hi_moves ? 1.0 - kEps : 0.0) * zb);
      out[i_beta_] = g[1] * (hi - lo);
    }
    if (i_gamma_ >= 0) {
      const bool lo_moves = kEps * (1.0 - alpha) > gamma_range_.lo;
      const bool hi_moves = (1.0 - kEps) * (1.0 - alpha) < gamma_range_.hi;
      const double lo = lo_moves ? kEps * (1.0 - alpha) : gamma_range_.lo;
      const double hi = hi_moves ? (1.0 - kEps) * (1.0 - alpha) : gamma_range_.hi;
      const double zg = z[i_gamma_];
      d_alpha += g[2] * ((lo_moves ? -kEps : 0.0) * (1.0 - zg) + (hi_moves ? -(1.0 - kEps) : 0.0) * zg);
      out[i_gamma_] = g[2] * (hi - lo);
    }
    if (i_alpha_ >= 0) out[i_alpha_] = d_alpha;
    if (i_phi_ >= 0) out[i_phi_] = g[3];
  }

  double Evaluate(const double* z) {
    ++evaluations_;
    if (deadline_nanos_ > 0 && evaluations_ % kClockEvery == 0 && clock_.MonotonicNanos() > deadline_nanos_) {
      time_exhausted_ = true;
      if (running_ != nullptr) running_->force_stop();
    }
    if (!Decode(z)) return kPenalty;
    auto result = model::EvaluateLikelihood(spec_, params_, state_, y_);
    if (!result.ok() || !std::isfinite(result->loglik)) return kPenalty;
    const double f = -result->loglik;
    if (f < best_f_) {
      best_f_ = f;
      best_z_.assign(z, z + dim());
    }
    return f;
  }

  static double Objective(unsigned /*n*/, const double* z, double* /*grad*/, void* data) {
    return static_cast<Problem*>(data)->Evaluate(z);
  }

  void set_running(nlopt::opt* opt) { running_ = opt; }
  int evaluations() const { return evaluations_; }
  bool time_exhausted() const { return time_exhausted_; }
  bool joined_known() const { return false; }
  double best_f() const { return best_f_; }
  const std::vector<double>& best_z() const { return best_z_; }
  const Params& params() const { return params_; }
  const State& state() const { return state_; }

 private:
  const ModelSpec& spec_;
  std::span<const double> y_;
  const FitOptions& options_;
  std::vector<double> heuristic_season_;
  const Clock& clock_;
  int64_t deadline_nanos_;
  bool estimate_season_ = false;

  Range alpha_range_{}, beta_range_{}, gamma_range_{}, phi_range_{};
  int i_alpha_ = -1, i_beta_ = -1, i_gamma_ = -1, i_phi_ = -1;
  int i_level_ = -1, i_trend_ = -1, i_season_ = -1;
  double level0_ = 0, trend0_ = 0, level_scale_ = 1, trend_scale_ = 1, season_scale_ = 1;
  std::vector<double> lower_, upper_, step_;

  std::vector<double> season_;
  Params params_;
  State state_;
  int evaluations_ = 0;
  bool time_exhausted_ = false;
  nlopt::opt* running_ = nullptr;
  double best_f_ = std::numeric_limits<double>::infinity();
  std::vector<double> best_z_;
};

// A noise scale for the level and additive seasonal coordinates: root mean square of the
// differences of consecutive observations (falls back to the mean absolute value, then 1).
double NoiseScale(std::span<const double> y) {
  double sum_sq = 0.0, sum_abs = 0.0, prev = std::numeric_limits<double>::quiet_NaN();
  int diffs = 0, count = 0;
  for (double v : y) {
    if (std::isnan(v)) continue;
    if (!std::isnan(prev)) {
      sum_sq += (v - prev) * (v - prev);
      ++diffs;
    }
    prev = v;
    sum_abs += std::fabs(v);
    ++count;
  }
  if (diffs > 0 && sum_sq > 0) return std::sqrt(sum_sq / diffs);
  if (count > 0 && sum_abs > 0) return 0.01 * sum_abs / count;
  return 1.0;
}

// The smoothing coordinates of a Problem only: each evaluation decodes the smoothing
// parameters, lets the StateSolver find the best initial state for them (starting from the
// heuristic state, so the value depends on the parameters alone) and returns -loglik there.
// evaluations() counts likelihood passes (plain and tangent), the unit of max_evaluations.
class Profile {
 public:
  Profile(Problem& full, StateSolver& solver, const State& heuristic, int budget, const Clock& clock,
          int64_t deadline_nanos)
      : full_(full),
        solver_(solver),
        level0_(heuristic.level),
        trend0_(heuristic.trend),
        season0_(model::SeasonChronological(heuristic)),
        budget_(budget),
        clock_(clock),
        deadline_nanos_(deadline_nanos),
        z_(full.dim(), 0.0) {
    const size_t ns = full.smoothing_dim();
    lower_.assign(full.lower().begin(), full.lower().begin() + static_cast<std::ptrdiff_t>(ns));
    upper_.assign(full.upper().begin(), full.upper().begin() + static_cast<std::ptrdiff_t>(ns));
    step_.assign(full.step().begin(), full.step().begin() + static_cast<std::ptrdiff_t>(ns));
  }

  size_t dim() const { return lower_.size(); }
  const std::vector<double>& lower() const { return lower_; }
  const std::vector<double>& upper() const { return upper_; }
  const std::vector<double>& step() const { return step_; }

  // -loglik at the best state for the smoothing coordinates zs; with `grad` non-null also its
  // gradient (one more pass: the profile's gradient is the likelihood's partial derivative in
  // the smoothing parameters at the solved state).
  double Evaluate(const double* zs, double* grad = nullptr) {
    if (grad != nullptr) std::fill(grad, grad + dim(), 0.0);
    if (deadline_nanos_ > 0 && clock_.MonotonicNanos() > deadline_nanos_) {
      time_exhausted_ = true;
      if (running_ != nullptr) running_->force_stop();
      return kPenalty;
    }
    if (passes_ >= budget_) {
      if (running_ != nullptr) running_->force_stop();
      return kPenalty;
    }
    std::copy(zs, zs + dim(), z_.begin());
    if (!full_.Decode(z_.data())) return kPenalty;
    // Non-affine forms need several Gauss-Newton steps; starting from the best state so far
    // (close to the answer once the search has settled) saves most of them. The affine forms
    // are solved exactly from any start.
    const bool warm = !solver_.affine() && !best_z_.empty();
    double level = warm ? best_level_ : level0_, trend = warm ? best_trend_ : trend0_;
    season_ = warm ? best_season_ : season0_;
    double f = solver_.Solve(full_.params(), level, trend, season_, &passes_, coarse_);
    if (!(f < kPenalty) && warm) {
      level = level0_;
      trend = trend0_;
      season_ = season0_;
      f = solver_.Solve(full_.params(), level, trend, season_, &passes_, coarse_);
    }
    if (!(f < kPenalty)) return kPenalty;
    if (grad != nullptr) {
      double g[4];
      ++passes_;
      if (!solver_.ParamGradient(full_.params(), level, trend, season_, g)) return kPenalty;
      full_.SmoothingGradient(zs, g, grad);
    }
    if (running_ != nullptr && join_check_ && NearKnownOptimum(zs, f)) {
      joined_known_ = true;
      running_->force_stop();
    }
    if (f < best_f_) {
      best_f_ = f;
      best_z_.assign(zs, zs + dim());
      best_params_ = full_.params();
      best_level_ = level;
      best_trend_ = trend;
      best_season_ = season_;
    }
    return f;
  }

  static double Objective(unsigned /*n*/, const double* z, double* grad, void* data) {
    return static_cast<Profile*>(data)->Evaluate(z, grad);
  }

  void set_running(nlopt::opt* opt) {
    running_ = opt;
    if (opt != nullptr) joined_known_ = false;
  }
  int evaluations() const { return passes_; }
  bool time_exhausted() const { return time_exhausted_; }
  // True when the last run was stopped because it reached the basin of an earlier run's optimum.
  bool joined_known() const { return joined_known_; }
  // Records the end point of a finished run (see NearKnownOptimum).
  void AddKnownOptimum(std::vector<double> z, double f) { known_.push_back({std::move(z), f}); }
  // Whether runs from now on are stopped when they join a known basin (runs from the start
  // points only: a probe or a finishing run starts at a known optimum on purpose).
  void set_join_check(bool on) { join_check_ = on; }
  // Whether evaluations solve the state only roughly (see StateSolver::Solve): for a probe.
  void set_coarse(bool on) { coarse_ = on; }
  double best_f() const { return best_f_; }
  const std::vector<double>& best_z() const { return best_z_; }
  const Params& best_params() const { return best_params_; }
  State best_state() const { return model::MakeState(best_level_, best_trend_, best_season_); }

 private:
  Problem& full_;
  StateSolver& solver_;
  double level0_, trend0_;
  std::vector<double> season0_, season_;
  int budget_;
  const Clock& clock_;
  int64_t deadline_nanos_;
  std::vector<double> z_, lower_, upper_, step_;
  // A run from another start that comes this close (every smoothing coordinate, in box units)
  // to an earlier run's end point, without being better there, is in that basin: finishing it
  // would find the same optimum again.
  bool NearKnownOptimum(const double* zs, double f) const {
    for (const KnownOptimum& k : known_) {
      if (f < k.f) continue;
      bool near = true;
      for (size_t i = 0; i < k.z.size() && near; ++i) {
        near = std::fabs(zs[i] - k.z[i]) <= kJoinRadius * (upper_[i] - lower_[i]);
      }
      if (near) return true;
    }
    return false;
  }
  struct KnownOptimum {
    std::vector<double> z;
    double f;
  };
  std::vector<KnownOptimum> known_;
  bool join_check_ = false;
  bool joined_known_ = false;
  bool coarse_ = false;
  int passes_ = 0;
  bool time_exhausted_ = false;
  nlopt::opt* running_ = nullptr;
  double best_f_ = std::numeric_limits<double>::infinity();
  std::vector<double> best_z_;
  Params best_params_;
  double best_level_ = 0, best_trend_ = 0;
  std::vector<double> best_season_;
};

// One BOBYQA run from z; returns how it ended. The best point lives in `problem` (a Problem
// or a Profile).
template <typename P>
StopReason RunOnce(P& problem, nlopt::algorithm algorithm, std::vector<double> z, int max_evals, double tolerance,
                   double step_scale = 1.0, std::vector<double>* end = nullptr, double* end_f = nullptr) {
  nlopt::opt opt(algorithm, static_cast<unsigned>(problem.dim()));
  opt.set_lower_bounds(problem.lower());
  opt.set_upper_bounds(problem.upper());
  std::vector<double> step = problem.step();
  for (size_t i = 0; i < step.size(); ++i) {
    step[i] = std::min(step[i] * step_scale, 0.45 * (problem.upper()[i] - problem.lower()[i]));
  }
  opt.set_initial_step(step);
  opt.set_min_objective(&P::Objective, &problem);
  opt.set_ftol_rel(tolerance);
  opt.set_xtol_rel(1e-9);
  opt.set_maxeval(max_evals);
  problem.set_running(&opt);
  double f = 0.0;
  StopReason reason = StopReason::kConverged;
  // nlopt.hpp reports some endings by exception; they are outcomes here, not errors.
  try {
    const nlopt::result r = opt.optimize(z, f);
    if (r == nlopt::MAXEVAL_REACHED) reason = StopReason::kEvaluationBudget;
  } catch (const nlopt::forced_stop&) {
    // A Problem stops only for time; a Profile also when its pass budget runs out or when the
    // run joined an earlier run's basin (an ending like convergence, to a known point).
    reason = problem.time_exhausted()   ? StopReason::kTimeBudget
             : problem.joined_known() ? StopReason::kConverged
                                      : StopReason::kEvaluationBudget;
  } catch (const nlopt::roundoff_limited&) {
    reason = StopReason::kRoundoff;
  } catch (const std::exception&) {
    reason = StopReason::kRoundoff;
  }
  problem.set_running(nullptr);
  if (end != nullptr) *end = z;
  if (end_f != nullptr) *end_f = f;
  if (problem.time_exhausted()) reason = StopReason::kTimeBudget;
  return reason;
}

// Screening runs from each start (when there are several and screen > 0), then the full run
// from the best point and restarts with a fresh trust region: BOBYQA sometimes stops while its
// interpolation set is degenerate; a restart that finds nothing costs about 2 dim + 1
// evaluations. At most kMaxRestarts restarts, while they still improve. The surfaces are often
// multimodal in (alpha, beta, phi), and a screening run is enough to see which basin a start
// falls into. The best point lives in `problem`.
template <typename P>
StopReason Search(P& problem, std::vector<std::vector<double>>& start_points, int screen, int budget_end,
                  double tolerance) {
  StopReason stop = StopReason::kConverged;
  for (std::vector<double>& z : start_points) {
    if (problem.Evaluate(z.data()) >= kPenalty) continue;  // infeasible start: try the next
    if (screen > 0 && start_points.size() > 1) {
      stop = RunOnce(problem, nlopt::LN_BOBYQA, z, screen, tolerance);
      if (stop == StopReason::kTimeBudget) break;
    }
  }
  if (problem.best_z().empty() || stop == StopReason::kTimeBudget) return stop;
  for (int round = 0; round <= kMaxRestarts; ++round) {
    const int left = budget_end - problem.evaluations();
    if (left <= 0) return StopReason::kEvaluationBudget;
    const double before = problem.best_f();
    stop = RunOnce(problem, nlopt::LN_BOBYQA, problem.best_z(), left, tolerance,
                   kRestartStepScale[static_cast<size_t>(round)]);
    // A roundoff stop (degenerate interpolation set, common on a flat ridge such as alpha at
    // its bound) is what the restart is for; budgets end the loop.
    if (stop == StopReason::kEvaluationBudget || stop == StopReason::kTimeBudget) break;
    if (round > 0 && !(problem.best_f() < before - 1e-9 * std::fabs(before))) break;
  }
  return stop;
}

// The concentrated search: every start runs to convergence with L-BFGS on the exact gradient
// (10-30 evaluations each in 1-4 dimensions; a run that reaches an earlier run's optimum stops
// there, see Profile::NearKnownOptimum) and the best point is kept. The surfaces are often
// multimodal in (alpha, beta, gamma, phi), and a gradient method stops in whichever basin its
// line searches lead to; so a short BOBYQA probe with a wide trust region follows from the best
// point (its first 2 dim + 1 evaluations sample a neighbourhood 0.25 wide in every coordinate),
// and when it finds better, L-BFGS finishes from there. The probe's evaluations solve the state
// coarsely (one Gauss-Newton step where the solve is iterative): each value is the likelihood of
// an actual point, an upper bound of the profile, and a better basin shows by far more than the
// bound's slack. The best point lives in `profile`.
StopReason GradientSearch(Profile& profile, std::vector<std::vector<double>>& start_points, int probe_evaluations,
                          int budget_end, double tolerance) {
  StopReason best_stop = StopReason::kConverged;
  profile.set_join_check(true);
  for (const std::vector<double>& z : start_points) {
    const int left = budget_end - profile.evaluations();
    if (left <= 0) return StopReason::kEvaluationBudget;
    const double before = profile.best_f();
    std::vector<double> end = z;
    double end_f = 0.0;
    const StopReason stop = RunOnce(profile, nlopt::LD_LBFGS, z, left, tolerance, 1.0, &end, &end_f);
    if (profile.best_f() < before) best_stop = stop;
    if (stop == StopReason::kTimeBudget || stop == StopReason::kEvaluationBudget) return stop;
    if (!profile.joined_known() && end_f < kPenalty) profile.AddKnownOptimum(std::move(end), end_f);
  }
  profile.set_join_check(false);
  if (profile.best_z().empty()) return best_stop;
  for (int round = 0; round < kMaxRestarts; ++round) {
    const int left = budget_end - profile.evaluations();
    if (left <= 0) return StopReason::kEvaluationBudget;
    const double before = profile.best_f();
    profile.set_coarse(true);
    const StopReason probe = RunOnce(profile, nlopt::LN_BOBYQA, profile.best_z(), std::min(left, probe_evaluations),
                                     tolerance, kRestartStepScale[1]);
    profile.set_coarse(false);
    if (probe == StopReason::kTimeBudget) return probe;
    if (!(profile.best_f() < before - 1e-9 * std::fabs(before))) break;
    const int rest = budget_end - profile.evaluations();
    if (rest <= 0) return StopReason::kEvaluationBudget;
    best_stop = RunOnce(profile, nlopt::LD_LBFGS, profile.best_z(), rest, tolerance);
    if (best_stop == StopReason::kTimeBudget || best_stop == StopReason::kEvaluationBudget) return best_stop;
  }
  return best_stop;
}

// The result at the chosen parameters and initial state, with the likelihood recomputed by the
// model module (so what is reported is exactly what the model computes).
Result<FitResult> Finish(const ModelSpec& spec, std::span<const double> y, const FitOptions& options,
                         const Params& params, const State& initial, StopReason stop, int evaluations,
                         bool season_estimated, const Clock& clock, int64_t start_nanos) {
  FitResult out;
  out.spec = spec;
  out.seasonal_states_estimated = !spec.has_season() || season_estimated;
  out.params = params;
  out.initial_state = initial;
  auto final_lik = model::EvaluateLikelihood(spec, out.params, out.initial_state, y);
  if (!final_lik.ok()) return final_lik.status().WithContext(spec.Notation());
  out.loglik = final_lik->loglik;
  out.sigma2 = final_lik->sigma2;
  out.n = final_lik->n;
  out.final_state = std::move(final_lik->final_state);
  out.final_state.sigma2 = out.sigma2;
  out.initial_state.sigma2 = out.sigma2;
  out.k = CountEstimated(spec, options);
  out.criteria = model::Criteria(out.loglik, out.n, out.k);
  out.stop = stop;
  out.converged = stop == StopReason::kConverged;
  out.evaluations = evaluations;
  out.seconds = static_cast<double>(clock.MonotonicNanos() - start_nanos) * 1e-9;
  return out;
}

}  // namespace

std::string_view StopReasonName(StopReason reason) {
  switch (reason) {
    case StopReason::kConverged: return "converged";
    case StopReason::kEvaluationBudget: return "evaluation budget";
    case StopReason::kTimeBudget: return "time budget";
    case StopReason::kRoundoff: return "roundoff";
  }
  return "unknown";
}

Status CheckFormSuitsData(const ModelSpec& spec, std::span<const double> y, const DataSummary& data,
                          const FitOptions& options) {
  if (spec.needs_positive_data() && !data.positive) {
    return Status::InvalidArgument("needs strictly positive data; observation " +
                                   std::to_string(data.first_non_positive) + " is " +
                                   FormatValue(y[data.first_non_positive]));
  }
  if (spec.has_season() && y.size() < static_cast<size_t>(kMinSeasonalPeriods) * static_cast<size_t>(spec.period)) {
    return Status::InvalidArgument("needs " + std::to_string(kMinSeasonalPeriods) + " full periods (" +
                                   std::to_string(kMinSeasonalPeriods * spec.period) +
                                   " observations); history has " + std::to_string(y.size()));
  }
  const int k = CountEstimated(spec, options);
  if (data.n <= k + 1) {
    return Status::InvalidArgument("needs more than " + std::to_string(k + 1) + " observations for " +
                                   std::to_string(k) + " parameters; history has " + std::to_string(data.n));
  }
  return Status::Ok();
}

int CountEstimated(const ModelSpec& spec, const FitOptions& options) {
  int k = model::CountParameters(spec);
  if (options.alpha.fixed) --k;
  if (spec.has_trend() && options.beta.fixed) --k;
  if (spec.has_season() && options.gamma.fixed) --k;
  if (spec.damped() && options.phi.fixed) --k;
  if (spec.has_season() && spec.period > options.max_estimated_season) k -= spec.period - 1;
  return k;
}

Result<DataSummary> SummariseData(std::span<const double> y) {
  DataSummary s;
  for (size_t i = 0; i < y.size(); ++i) {
    const double v = y[i];
    if (std::isnan(v)) continue;
    if (!std::isfinite(v)) {
      return Status::InvalidArgument("observation " + std::to_string(i) + " is infinite");
    }
    ++s.n;
    if (v <= 0 && s.positive) {
      s.positive = false;
      s.first_non_positive = i;
    }
  }
  if (s.n == 0) return Status::InvalidArgument("history has no observations (empty or all missing)");
  return s;
}

std::string FormatValue(double v) {
  char buf[32];
  std::snprintf(buf, sizeof(buf), "%.6g", v);
  return buf;
}

bool IsErrorTwin(const ModelSpec& spec, const ModelSpec& twin) {
  return spec.error == model::ErrorType::kMultiplicative && twin.error == model::ErrorType::kAdditive &&
         spec.trend == twin.trend && spec.season == twin.season && spec.period == twin.period &&
         spec.season != model::SeasonType::kMultiplicative && StateSolver::Supports(spec);
}

bool IsSeasonTwin(const ModelSpec& spec, const ModelSpec& twin) {
  return spec.season == model::SeasonType::kMultiplicative && twin.season == model::SeasonType::kAdditive &&
         spec.error == twin.error && spec.trend == twin.trend && spec.period == twin.period &&
         StateSolver::Supports(spec);
}

bool IsTrendTwin(const ModelSpec& spec, const ModelSpec& twin) {
  return spec.trend == model::TrendType::kAdditiveDamped && twin.trend == model::TrendType::kAdditive &&
         spec.error == model::ErrorType::kAdditive && twin.error == spec.error &&
         spec.season == twin.season && spec.period == twin.period && StateSolver::Supports(spec);
}

namespace {

// The twin's optimum as a start for `spec`: unchanged for an error twin; for a trend twin with
// phi at the top of the usual range (a damped form starts nearly undamped); for a season twin the
// additive seasonal states become factors 1 + s / level (renormalised to mean 1), gamma kept
// (s_t = s_{t-m} + gamma mu eps against s_t = s_{t-m} (1 + gamma eps) with mu ~ level s).
// Empty when a factor would not be clearly positive, or when the seasonal states are not
// estimated (they stay at this form's own heuristic values then, not the twin's).
std::optional<FitResult> TwinStart(const ModelSpec& spec, const FitResult& twin, bool estimate_season) {
  if (IsErrorTwin(spec, twin.spec)) return twin;
  if (IsTrendTwin(spec, twin.spec)) {
    FitResult out = twin;
    out.spec = spec;
    out.params.phi = 0.98;
    return out;
  }
  if (!IsSeasonTwin(spec, twin.spec) || !estimate_season || !(twin.initial_state.level > 0)) return std::nullopt;
  std::vector<double> season = model::SeasonChronological(twin.initial_state);
  double mean = 0.0;
  for (double& s : season) {
    s = 1.0 + s / twin.initial_state.level;
    if (!(s > 0.05)) return std::nullopt;
    mean += s;
  }
  mean /= static_cast<double>(season.size());
  for (double& s : season) s /= mean;
  FitResult out = twin;
  out.spec = spec;
  out.initial_state = model::MakeState(twin.initial_state.level, twin.initial_state.trend, season);
  return out;
}

}  // namespace

Result<FitResult> FitValidated(const ModelSpec& spec, std::span<const double> y, const DataSummary& data,
                               const FitOptions& options, const Clock& clock, const FitResult* twin) {
  const int64_t start_nanos = clock.MonotonicNanos();
  PLIMSOLL_RETURN_IF_ERROR(CheckFormSuitsData(spec, y, data, options).WithContext(spec.Notation()));
  auto heuristic = HeuristicState(spec, y);
  if (!heuristic.ok()) return heuristic.status();

  const int64_t deadline =
      options.max_seconds_per_form > 0 ? start_nanos + static_cast<int64_t>(options.max_seconds_per_form * 1e9) : 0;
  Problem problem(spec, y, options, *heuristic, NoiseScale(y), clock, deadline);
  if (problem.alpha_range_empty()) {
    return Status::InvalidArgument(spec.Notation() + ": the fixed beta/gamma and the alpha range leave no room for alpha");
  }
  const int starts = std::min<int>(options.starts, static_cast<int>(kStarts.size()));
  if (options.region == model::ParamRegion::kUsual && StateSolver::Supports(spec) && problem.smoothing_dim() > 0) {
    // Concentrated search: the optimiser sees only the smoothing parameters; the initial state
    // is solved for at each of their values.
    StateSolver solver(spec, y, problem.estimate_season());
    // The twin's initial state is a start for the state solve only where this form can use it.
    std::optional<FitResult> twin_start;
    if (twin != nullptr && twin->initial_state.level > 0 &&
        (!spec.has_season() || twin->seasonal_states_estimated == problem.estimate_season())) {
      twin_start = TwinStart(spec, *twin, problem.estimate_season());
    }
    const bool use_twin = twin_start.has_value();
    if (use_twin) twin = &*twin_start;
    Profile profile(problem, solver, use_twin ? twin->initial_state : *heuristic, options.max_evaluations, clock,
                    deadline);
    std::vector<std::vector<double>> start_points;
    if (use_twin) {
      std::vector<double> z = problem.Encode(twin->params, twin->initial_state);
      z.resize(problem.smoothing_dim());
      start_points.push_back(std::move(z));
    }
    for (int s = 0; s < starts && !use_twin; ++s) {
      std::vector<double> z = problem.StartPoint(kStarts[static_cast<size_t>(s)]);
      z.resize(problem.smoothing_dim());
      start_points.push_back(std::move(z));
    }
    // Non-seasonal forms have cheap evaluations (one or two states) and get the longer probe:
    // with the short one, elec_equip ETS(M,A,N) stopped 0.25 below the reference's optimum.
    const int probe = problem.estimate_season() ? kProbePerDim * static_cast<int>(profile.dim()) + kProbeBase
                                                : kScreenPerDim * static_cast<int>(profile.dim()) + kScreenBase;
    const StopReason stop =
        GradientSearch(profile, start_points, probe, options.max_evaluations, options.relative_tolerance);
    if (profile.best_z().empty()) {
      return Status::NumericFailure(spec.Notation() + ": no start point has a finite likelihood");
    }
    return Finish(spec, y, options, profile.best_params(), profile.best_state(), stop, profile.evaluations(),
                  problem.estimate_season(), clock, start_nanos);
  }

  std::vector<std::vector<double>> start_points;
  int usual_evaluations = 0;
  if (options.region == model::ParamRegion::kAdmissible) {
    // The admissible region contains the usual one: start from the usual optimum, so the wider
    // search can only improve on it.
    FitOptions usual_options = options;
    usual_options.region = model::ParamRegion::kUsual;
    usual_options.alpha.upper = std::min(options.alpha.upper.value_or(1.0), 1.0 - kEps);
    usual_options.beta.upper = std::min(options.beta.upper.value_or(1.0), 1.0);
    usual_options.gamma.upper = std::min(options.gamma.upper.value_or(1.0), 1.0);
    if (ValidateOptions(usual_options).ok()) {
      auto usual = FitValidated(spec, y, data, usual_options, clock);
      if (usual.ok()) {
        start_points.push_back(problem.Encode(usual->params, usual->initial_state));
        usual_evaluations = usual->evaluations;
      }
    }
  }
  bool screened = false;
  int screening_evaluations = 0;  // counted in the budget of this fit
  if (starts > 1 && problem.estimate_season()) {
    // Screening with every seasonal state held at its heuristic value: a handful of dimensions,
    // so each screening evaluation is cheap and few are needed; the full run starts from the
    // best screened point.
    FitOptions reduced = options;
    reduced.max_estimated_season = 1;
    Problem coarse(spec, y, reduced, *heuristic, NoiseScale(y), clock, deadline);
    const int coarse_screen = std::min(options.max_evaluations / (2 * starts),
                                       kScreenPerDim * static_cast<int>(coarse.dim()) + kScreenBase);
    for (int s = 0; s < starts; ++s) {
      std::vector<double> z = coarse.StartPoint(kStarts[static_cast<size_t>(s)]);
      if (coarse.Evaluate(z.data()) >= kPenalty) continue;
      if (RunOnce(coarse, nlopt::LN_BOBYQA, z, coarse_screen, options.relative_tolerance) == StopReason::kTimeBudget) {
        break;
      }
    }
    if (!coarse.best_z().empty() && coarse.Decode(coarse.best_z().data())) {
      start_points.push_back(problem.Encode(coarse.params(), coarse.state()));
      screened = true;
    }
    screening_evaluations = coarse.evaluations();
  }
  if (!screened) {
    for (int s = 0; s < starts; ++s) start_points.push_back(problem.StartPoint(kStarts[static_cast<size_t>(s)]));
  }

  const int screen = start_points.size() > 1
                         ? std::min(options.max_evaluations / static_cast<int>(2 * start_points.size()),
                                    kScreenPerDim * static_cast<int>(problem.dim()) + kScreenBase)
                         : 0;
  const StopReason stop = Search(problem, start_points, screen, options.max_evaluations - screening_evaluations,
                                 options.relative_tolerance);
  if (problem.best_z().empty()) {
    return Status::NumericFailure(spec.Notation() + ": no start point has a finite likelihood");
  }
  if (!problem.Decode(problem.best_z().data())) {
    return Status::Internal(spec.Notation() + ": best point does not decode");
  }
  return Finish(spec, y, options, problem.params(), problem.state(), stop,
                usual_evaluations + screening_evaluations + problem.evaluations(), problem.estimate_season(),
                clock, start_nanos);
}

Result<FitResult> FitModel(const ModelSpec& spec, std::span<const double> y, const FitOptions& options,
                           const Clock& clock) {
  PLIMSOLL_RETURN_IF_ERROR(ValidateOptions(options));
  if (spec.has_season() && spec.period != options.period) {
    return Status::InvalidArgument("form period " + std::to_string(spec.period) + " differs from options.period " +
                                   std::to_string(options.period));
  }
  auto data = SummariseData(y);
  if (!data.ok()) return data.status();
  return FitValidated(spec, y, *data, options, clock);
}

}  // namespace plimsoll::fit
