// Gauss-Newton on the initial state for fixed smoothing parameters; see state_solver.h.
#include "fit/state_solver.h"

#include <Eigen/Cholesky>
#include <Eigen/Core>

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>

#include "plimsoll/model/likelihood.h"

namespace plimsoll::fit {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
// Gauss-Newton steps per solve; relative errors and multiplicative seasons need 3-6 from the
// heuristic state, the cap only guards against slow progress on a flat surface.
constexpr int kMaxSteps = 20;
// Step halvings in the line search before the solve gives up on the direction.
constexpr int kMaxHalvings = 12;
// A step improving -loglik by less than this (relative) ends the solve: well below the
// optimiser's own tolerance, so the profile it sees is smooth to that level.
constexpr double kStepTolerance = 1e-12;
constexpr double kSmallGain = 1e-10;

}  // namespace

bool StateSolver::Supports(const model::ModelSpec& spec) {
  return spec.trend == model::TrendType::kNone || spec.trend == model::TrendType::kAdditive ||
         spec.trend == model::TrendType::kAdditiveDamped;
}

StateSolver::StateSolver(const model::ModelSpec& spec, std::span<const double> y, bool estimate_season)
    : spec_(spec), y_(y), estimate_season_(estimate_season && spec.has_season()) {
  p_ = 1 + (spec.has_trend() ? 1 : 0) + (estimate_season_ ? spec.period - 1 : 0);
  for (double v : y) n_obs_ += std::isnan(v) ? 0 : 1;
  jacobian_.resize(static_cast<size_t>(n_obs_) * static_cast<size_t>(p_));
  residuals_.resize(static_cast<size_t>(n_obs_));
  const size_t p = static_cast<size_t>(p_);
  for (auto* v : {&grad_log_mu_, &t_level_, &t_trend_, &d_lp_, &d_mu_, &d_scaled_, &d_e_}) v->resize(p);
  t_season_.resize(spec.has_season() ? p * static_cast<size_t>(spec.period) : 0);
}

bool StateSolver::affine() const {
  return spec_.error == model::ErrorType::kAdditive && spec_.season != model::SeasonType::kMultiplicative;
}

double StateSolver::Objective(const model::Params& params, double level, double trend,
                              const std::vector<double>& season) {
  if (spec_.needs_positive_data() && !(level > 0)) return kInf;
  if (spec_.season == model::SeasonType::kMultiplicative) {
    for (double s : season) {
      if (!(s > 0)) return kInf;
    }
  }
  auto r = model::EvaluateLikelihood(spec_, params, model::MakeState(level, trend, season), y_);
  if (!r.ok() || !std::isfinite(r->loglik)) return kInf;
  return -r->loglik;
}

bool StateSolver::Tangents(const model::Params& params, double level, double trend,
                           const std::vector<double>& season) {
  const size_t p = static_cast<size_t>(p_);
  const size_t m = season.size();
  const bool has_trend = spec_.has_trend();
  const bool add_season = spec_.season == model::SeasonType::kAdditive;
  const bool mult_season = spec_.season == model::SeasonType::kMultiplicative;
  const bool mult_error = spec_.error == model::ErrorType::kMultiplicative;
  const double phi = spec_.damped() ? params.phi : 1.0;
  const double alpha = params.alpha, beta = params.beta, gamma = params.gamma;

  std::fill(t_level_.begin(), t_level_.end(), 0.0);
  std::fill(t_trend_.begin(), t_trend_.end(), 0.0);
  std::fill(t_season_.begin(), t_season_.end(), 0.0);
  std::fill(grad_log_mu_.begin(), grad_log_mu_.end(), 0.0);
  t_level_[0] = 1.0;
  if (has_trend) t_trend_[1] = 1.0;
  if (estimate_season_) {
    // Free seasonal coordinates are the first m - 1 chronological states; the last follows from
    // the normalisation (sum 0 or mean 1), so it moves by minus their sum.
    const size_t o = has_trend ? 2 : 1;
    for (size_t j = 0; j + 1 < m; ++j) {
      t_season_[j * p + o + j] = 1.0;
      t_season_[(m - 1) * p + o + j] = -1.0;
    }
  }
  season_work_ = season;
  double l = level, b = has_trend ? trend : 0.0;
  size_t row = 0;
  size_t k = 0;  // seasonal slot of this observation
  double* dlp = d_lp_.data();
  double* dmu = d_mu_.data();
  double* dsc = d_scaled_.data();
  double* de = d_e_.data();
  double* tl = t_level_.data();
  double* tb = t_trend_.data();
  for (size_t t = 0; t < y_.size(); ++t) {
    const double lp = l + phi * b;
    if (has_trend) {
      for (size_t i = 0; i < p; ++i) dlp[i] = tl[i] + phi * tb[i];
    } else {
      for (size_t i = 0; i < p; ++i) dlp[i] = tl[i];
    }
    double s = 0.0, mu = lp;
    double* ds = spec_.has_season() ? t_season_.data() + k * p : nullptr;
    if (add_season) {
      s = season_work_[k];
      mu = lp + s;
      for (size_t i = 0; i < p; ++i) dmu[i] = dlp[i] + ds[i];
    } else if (mult_season) {
      s = season_work_[k];
      mu = lp * s;
      for (size_t i = 0; i < p; ++i) dmu[i] = dlp[i] * s + lp * ds[i];
    } else {
      for (size_t i = 0; i < p; ++i) dmu[i] = dlp[i];
    }
    if (!std::isfinite(mu) || (spec_.needs_positive_data() && !(mu > 0))) return false;
    const double yt = y_[t];
    const bool missing = std::isnan(yt);
    const double e = missing ? 0.0 : yt - mu;
    if (missing) {
      std::fill(d_e_.begin(), d_e_.end(), 0.0);
    } else {
      for (size_t i = 0; i < p; ++i) de[i] = -dmu[i];
    }
    double scaled = e;
    if (mult_season) {
      scaled = e / s;
      const double e_s2 = e / (s * s);
      for (size_t i = 0; i < p; ++i) dsc[i] = de[i] / s - e_s2 * ds[i];
    } else {
      for (size_t i = 0; i < p; ++i) dsc[i] = de[i];
    }
    l = lp + alpha * scaled;
    for (size_t i = 0; i < p; ++i) tl[i] = dlp[i] + alpha * dsc[i];
    if (has_trend) {
      b = phi * b + beta * scaled;
      for (size_t i = 0; i < p; ++i) tb[i] = phi * tb[i] + beta * dsc[i];
    }
    if (add_season) {
      season_work_[k] = s + gamma * e;
      for (size_t i = 0; i < p; ++i) ds[i] += gamma * de[i];
    } else if (mult_season) {
      season_work_[k] = s + gamma * e / lp;
      const double e_lp2 = e / (lp * lp);
      for (size_t i = 0; i < p; ++i) ds[i] += gamma * (de[i] / lp - e_lp2 * dlp[i]);
    }
    if (spec_.has_season() && ++k == m) k = 0;
    if (missing) continue;
    double* jrow = jacobian_.data() + row * p;
    if (mult_error) {
      residuals_[row] = e / mu;
      const double c = -yt / (mu * mu);
      const double inv_mu = 1.0 / mu;
      for (size_t i = 0; i < p; ++i) {
        jrow[i] = c * dmu[i];
        grad_log_mu_[i] += inv_mu * dmu[i];
      }
    } else {
      residuals_[row] = e;
      for (size_t i = 0; i < p; ++i) jrow[i] = de[i];
    }
    ++row;
  }
  return true;
}

double StateSolver::Solve(const model::Params& params, double& level, double& trend,
                          std::vector<double>& season, int* passes) {
  // Additive error with additive components: residuals affine in the state, so one step is the
  // exact optimum and the residuals there are r + J delta (no second pass needed).
  const Eigen::Index p = p_;
  const size_t m = season.size();
  const size_t o = spec_.has_trend() ? 2 : 1;
  auto move = [&](const Eigen::VectorXd& delta, double lambda, double& l, double& b, std::vector<double>& s) {
    l = level + lambda * delta[0];
    b = spec_.has_trend() ? trend + lambda * delta[1] : trend;
    s = season;
    if (estimate_season_) {
      double moved = 0.0;
      for (size_t j = 0; j + 1 < m; ++j) {
        const double dj = lambda * delta[static_cast<Eigen::Index>(o + j)];
        s[j] += dj;
        moved += dj;
      }
      s[m - 1] -= moved;
    }
  };
  if (affine()) {
    ++*passes;
    if (!Tangents(params, level, trend, season)) return kInf;
    Eigen::Map<const Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>> jac(jacobian_.data(),
                                                                                              n_obs_, p);
    Eigen::Map<const Eigen::VectorXd> r(residuals_.data(), n_obs_);
    Eigen::MatrixXd h = Eigen::MatrixXd::Zero(p, p);
    h.selfadjointView<Eigen::Lower>().rankUpdate(jac.transpose());
    h.diagonal().array() += 1e-12 * std::max(h.diagonal().maxCoeff(), 1e-300);
    const Eigen::VectorXd delta = -(h.selfadjointView<Eigen::Lower>().ldlt().solve(jac.transpose() * r));
    const double sse_start = r.squaredNorm();
    double sse = delta.allFinite() ? (r + jac * delta).squaredNorm() : kInf;
    if (sse < sse_start) {
      double l = 0, b = 0;
      move(delta, 1.0, l, b, trial_season_);
      level = l;
      trend = b;
      season.swap(trial_season_);
    } else {
      sse = sse_start;
    }
    if (!(sse > 0) || !std::isfinite(sse)) return kInf;
    const double n = n_obs_;
    return 0.5 * n * (std::log(2.0 * std::numbers::pi * sse / n) + 1.0);
  }
  double f = Objective(params, level, trend, season);
  ++*passes;
  if (!std::isfinite(f)) return kInf;
  // The Hessian J'J (O(n p^2), the dearest part) is formed at the first step and reused by the
  // later (chord) steps while full steps are accepted: near the optimum it changes little
  // between steps, and the line search guards the rest.
  Eigen::LDLT<Eigen::MatrixXd, Eigen::Lower> factor;
  bool refresh = true;
  for (int step_count = 0; step_count < kMaxSteps; ++step_count) {
    ++*passes;
    if (!Tangents(params, level, trend, season)) break;
    Eigen::Map<const Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>> jac(jacobian_.data(),
                                                                                              n_obs_, p);
    Eigen::Map<const Eigen::VectorXd> r(residuals_.data(), n_obs_);
    if (refresh) {
      Eigen::MatrixXd h = Eigen::MatrixXd::Zero(p, p);
      h.selfadjointView<Eigen::Lower>().rankUpdate(jac.transpose());
      // A tiny ridge keeps the solve defined when a direction is (nearly) unidentified, e.g. a
      // trend and a seasonal ramp on a short history.
      const double ridge = 1e-12 * std::max(h.diagonal().maxCoeff(), 1e-300);
      h.diagonal().array() += ridge;
      factor.compute(h);
      refresh = false;
    }
    // Gradient of n/2 log S (+ sum log mu) scaled by S/n, and the Gauss-Newton Hessian J'J on
    // the same scale.
    Eigen::VectorXd g = jac.transpose() * r;
    if (spec_.error == model::ErrorType::kMultiplicative) {
      const double scale = r.squaredNorm() / n_obs_;
      for (Eigen::Index i = 0; i < p; ++i) g[i] += scale * grad_log_mu_[static_cast<size_t>(i)];
    }
    const Eigen::VectorXd delta = -factor.solve(g);
    if (!delta.allFinite()) break;
    // The Gauss-Newton model's predicted decrease of -loglik, (n/S) g'H^-1 g / 2: when it is
    // below the tolerance the state is converged and the line search is skipped.
    const double predicted = -0.5 * n_obs_ / r.squaredNorm() * g.dot(delta);
    if (!(predicted > kStepTolerance * std::fabs(f))) break;
    double lambda = 1.0;
    bool accepted = false;
    double f_new = f;
    double new_level = level, new_trend = trend;
    for (int halving = 0; halving < kMaxHalvings; ++halving, lambda *= 0.5) {
      move(delta, lambda, new_level, new_trend, trial_season_);
      f_new = Objective(params, new_level, new_trend, trial_season_);
      ++*passes;
      if (f_new < f) {
        accepted = true;
        break;
      }
    }
    if (!accepted) break;
    if (lambda < 1.0) refresh = true;
    const double gain = f - f_new;
    f = f_new;
    level = new_level;
    trend = new_trend;
    season.swap(trial_season_);
    // Gauss-Newton converges linearly here with a small rate (the relative errors are small),
    // so after a full step gaining less than kSmallGain the next would gain far below the
    // tolerance: stop without another tangent pass.
    if (gain <= kStepTolerance * std::fabs(f) || (lambda == 1.0 && gain <= kSmallGain * std::fabs(f))) break;
  }
  return f;
}

}  // namespace plimsoll::fit
