// Gauss-Newton on the initial state for fixed smoothing parameters; see state_solver.h.
#include "fit/state_solver.h"

#include <Eigen/Cholesky>
#include <Eigen/Core>

#include <immintrin.h>

#include <algorithm>
#include <bit>
#include <cstdint>
#include <cmath>
#include <cstring>
#include <limits>
#include <numbers>

#include "plimsoll/model/likelihood.h"

namespace plimsoll::fit {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

using JacobianMap = Eigen::Map<const Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>, 0,
                               Eigen::OuterStride<>>;
// Gauss-Newton steps per solve; relative errors and multiplicative seasons need 3-6 from the
// heuristic state, the cap only guards against slow progress on a flat surface.
constexpr int kMaxSteps = 20;
// Step halvings in the line search before the solve gives up on the direction.
constexpr int kMaxHalvings = 12;

// Backtracking on a Gauss-Newton step: halves the step from 1 until `trial(step)` (the objective
// there; NaN when the step leaves the region) is below `f`, which it leaves in `f_new`. Returns
// the accepted step, or 0 when kMaxHalvings halvings found none.
template <typename Trial>
double Backtrack(double f, double& f_new, Trial&& trial) {
  double step = 1.0;
  for (int halving = 0; halving < kMaxHalvings; ++halving, step *= 0.5) {
    f_new = trial(step);
    if (f_new < f) return step;
  }
  return 0.0;
}
// A step improving -loglik by less than this (relative) ends the solve: well below the
// optimiser's own tolerance, so the profile it sees is smooth to that level.
constexpr double kStepTolerance = 1e-12;
constexpr double kSmallGain = 1e-10;

// Rows of the Jacobian per block of the Gram kernel: 64 rows of up to 28 doubles stay in L1
// while every 4 x 8 block of J'J accumulates over them.
constexpr size_t kGramRows = 64;

// Lower 4 x 8 blocks of J'J (J: n rows of pp doubles, pp a multiple of 4) with AVX2 FMA: eight
// 4-wide accumulators per block, rows in L1-sized chunks. Each entry is summed over the rows in
// order, so the result depends on the machine's instruction set only through the fused
// multiply-adds (deterministic on one machine).
__attribute__((target("avx2,fma"))) void GramAvx2(const double* jac, size_t n, size_t pp, double* h) {
  for (size_t t0 = 0; t0 < n; t0 += kGramRows) {
    const size_t t1 = std::min(n, t0 + kGramRows);
    for (size_t i0 = 0; i0 < pp; i0 += 4) {
      for (size_t k0 = 0; k0 <= i0; k0 += 8) {
        const bool two = k0 + 4 <= i0;  // the second 4 columns are on or below the diagonal block
        double* h0 = h + i0 * pp + k0;
        __m256d a0 = _mm256_loadu_pd(h0), a1 = _mm256_loadu_pd(h0 + pp), a2 = _mm256_loadu_pd(h0 + 2 * pp),
                a3 = _mm256_loadu_pd(h0 + 3 * pp);
        if (two) {
          __m256d b0 = _mm256_loadu_pd(h0 + 4), b1 = _mm256_loadu_pd(h0 + pp + 4),
                  b2 = _mm256_loadu_pd(h0 + 2 * pp + 4), b3 = _mm256_loadu_pd(h0 + 3 * pp + 4);
          for (size_t t = t0; t < t1; ++t) {
            const double* row = jac + t * pp;
            const __m256d x = _mm256_loadu_pd(row + k0), z = _mm256_loadu_pd(row + k0 + 4);
            __m256d v = _mm256_broadcast_sd(row + i0);
            a0 = _mm256_fmadd_pd(v, x, a0); b0 = _mm256_fmadd_pd(v, z, b0);
            v = _mm256_broadcast_sd(row + i0 + 1);
            a1 = _mm256_fmadd_pd(v, x, a1); b1 = _mm256_fmadd_pd(v, z, b1);
            v = _mm256_broadcast_sd(row + i0 + 2);
            a2 = _mm256_fmadd_pd(v, x, a2); b2 = _mm256_fmadd_pd(v, z, b2);
            v = _mm256_broadcast_sd(row + i0 + 3);
            a3 = _mm256_fmadd_pd(v, x, a3); b3 = _mm256_fmadd_pd(v, z, b3);
          }
          _mm256_storeu_pd(h0 + 4, b0); _mm256_storeu_pd(h0 + pp + 4, b1);
          _mm256_storeu_pd(h0 + 2 * pp + 4, b2); _mm256_storeu_pd(h0 + 3 * pp + 4, b3);
        } else {
          for (size_t t = t0; t < t1; ++t) {
            const double* row = jac + t * pp;
            const __m256d x = _mm256_loadu_pd(row + k0);
            a0 = _mm256_fmadd_pd(_mm256_broadcast_sd(row + i0), x, a0);
            a1 = _mm256_fmadd_pd(_mm256_broadcast_sd(row + i0 + 1), x, a1);
            a2 = _mm256_fmadd_pd(_mm256_broadcast_sd(row + i0 + 2), x, a2);
            a3 = _mm256_fmadd_pd(_mm256_broadcast_sd(row + i0 + 3), x, a3);
          }
        }
        _mm256_storeu_pd(h0, a0); _mm256_storeu_pd(h0 + pp, a1);
        _mm256_storeu_pd(h0 + 2 * pp, a2); _mm256_storeu_pd(h0 + 3 * pp, a3);
      }
    }
  }
}

// The same J'J with 8-wide registers where the CPU has AVX-512: blocks of 4 output rows x up to
// 24 columns (three registers; 12 accumulators), columns past `width` masked off. Every entry is
// the same fused multiply-add chain over the rows in order as in GramAvx2, so both kernels give
// bit-identical results.
template <int kRegs>
__attribute__((target("avx512f"), always_inline)) inline void GramBlockAvx512(const double* jac, size_t t0, size_t t1,
                                                                             size_t pp, size_t width, size_t i0,
                                                                             size_t k0, double* h) {
  __mmask8 mask[kRegs];
  for (int z = 0; z < kRegs; ++z) {
    const size_t first = k0 + 8 * static_cast<size_t>(z);
    const size_t lanes = first < width ? std::min<size_t>(8, width - first) : 0;
    mask[z] = static_cast<__mmask8>((1u << lanes) - 1);
  }
  double* h0 = h + i0 * pp + k0;
  __m512d acc[4][kRegs];
  for (int r = 0; r < 4; ++r) {
    for (int z = 0; z < kRegs; ++z) acc[r][z] = _mm512_maskz_loadu_pd(mask[z], h0 + r * pp + 8 * z);
  }
  for (size_t t = t0; t < t1; ++t) {
    const double* row = jac + t * pp;
    __m512d x[kRegs];
    for (int z = 0; z < kRegs; ++z) x[z] = _mm512_maskz_loadu_pd(mask[z], row + k0 + 8 * z);
    for (int r = 0; r < 4; ++r) {
      const __m512d v = _mm512_set1_pd(row[i0 + static_cast<size_t>(r)]);
      for (int z = 0; z < kRegs; ++z) acc[r][z] = _mm512_fmadd_pd(v, x[z], acc[r][z]);
    }
  }
  for (int r = 0; r < 4; ++r) {
    for (int z = 0; z < kRegs; ++z) _mm512_mask_storeu_pd(h0 + r * pp + 8 * z, mask[z], acc[r][z]);
  }
}

// Lower blocks of J'J for the first `width` columns (a multiple of 4) of rows `pp` apart.
__attribute__((target("avx512f"))) void GramAvx512(const double* jac, size_t n, size_t pp, size_t width, double* h) {
  for (size_t t0 = 0; t0 < n; t0 += kGramRows) {
    const size_t t1 = std::min(n, t0 + kGramRows);
    for (size_t i0 = 0; i0 < width; i0 += 4) {
      const size_t end = i0 + 4;  // columns k < end: the lower triangle and the diagonal block
      size_t k0 = 0;
      for (; k0 + 16 < end; k0 += 24) GramBlockAvx512<3>(jac, t0, t1, pp, width, i0, k0, h);
      if (k0 + 8 < end) {
        GramBlockAvx512<2>(jac, t0, t1, pp, width, i0, k0, h);
      } else if (k0 < end) {
        GramBlockAvx512<1>(jac, t0, t1, pp, width, i0, k0, h);
      }
    }
  }
}

}  // namespace

// J'J of the first p columns (lower triangle filled; p x p).
Eigen::MatrixXd StateSolver::Gram(const AlignedVector& rows) const {
  const Eigen::Index p = p_;
  Eigen::MatrixXd h(p, p);
  if (wide_ || (__builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma"))) {
    const size_t pp = static_cast<size_t>(pp_);
    gram_.assign(pp * pp, 0.0);
    if (wide_) {
      GramAvx512(rows.data(), static_cast<size_t>(n_obs_), pp, static_cast<size_t>(p_ + 3) / 4 * 4, gram_.data());
    } else {
      GramAvx2(rows.data(), static_cast<size_t>(n_obs_), pp, gram_.data());
    }
    for (Eigen::Index i = 0; i < p; ++i) {
      for (Eigen::Index k = 0; k <= i; ++k) h(i, k) = gram_[static_cast<size_t>(i) * pp + static_cast<size_t>(k)];
    }
    return h;
  }
  const JacobianMap jac(rows.data(), n_obs_, p, Eigen::OuterStride<>(pp_));
  h.setZero();
  h.selfadjointView<Eigen::Lower>().rankUpdate(jac.transpose());
  return h;
}

bool StateSolver::Supports(const model::ModelSpec& spec) {
  return spec.trend == model::TrendType::kNone || spec.trend == model::TrendType::kAdditive ||
         spec.trend == model::TrendType::kAdditiveDamped;
}

StateSolver::StateSolver(const model::ModelSpec& spec, std::span<const double> y, bool estimate_season)
    : spec_(spec), y_(y), estimate_season_(estimate_season && spec.has_season()) {
  p_ = 1 + (spec.has_trend() ? 1 : 0) + (estimate_season_ ? spec.period - 1 : 0);
  for (double v : y) n_obs_ += std::isnan(v) ? 0 : 1;
  // Rows of a multiple of 8 doubles where the passes and the Gram run 8-wide (AVX-512); not for
  // 1-4 columns, which fit one 4-wide register (measured: the non-seasonal forms' passes were
  // slower 8-wide).
  wide_ = p_ > 4 && __builtin_cpu_supports("avx512f");
  pp_ = wide_ ? (p_ + 7) / 8 * 8 : (p_ + 3) / 4 * 4;
  const size_t pp = static_cast<size_t>(pp_);
  // One spare row: the pass writes a gap's row before knowing it will not keep it. The
  // affine_mu() forms keep a row for every step (gaps included).
  jacobian_.resize((std::max(static_cast<size_t>(n_obs_) + 1, y.size())) * pp);
  if (affine_mu()) {
    for (auto* v : {&mu0_, &mu_, &trial_mu_, &jd_, &weights_, &inv_mu_, &trial_inv_mu_, &resid_, &trial_resid_,
                    &row_scale_}) {
      v->resize(y.size());
    }
    scaled_.resize(static_cast<size_t>(n_obs_) * pp);
  }
  // Without gaps an additive season makes the recursion of the state's tangents time-invariant
  // in the frame that rotates with the season, so a seasonal state's column is the first one's
  // shifted by its position (see SolveShifted).
  const size_t m = static_cast<size_t>(spec.period);
  shifted_ = estimate_season_ && spec.season == model::SeasonType::kAdditive &&
             static_cast<size_t>(n_obs_) == y.size() && m >= 2 && y.size() >= 2 * m;
  if (shifted_) {
    lag_width_ = (m + 3) / 4 * 4;
    impulse_.resize(y.size() * 4);
    columns_.assign(4 * (y.size() + lag_width_ + 4), 0.0);
    lags_.resize(4 * lag_width_);
    jd_shift_.resize(y.size());
    shift_.resize(m);
  }
  residuals_.resize(static_cast<size_t>(n_obs_));
  for (auto* v : {&grad_log_mu_, &jr_, &t_level_, &t_trend_}) v->resize(pp);
  padded_.assign(pp, 0.0);
  t_season_.resize(spec.has_season() ? pp * static_cast<size_t>(spec.period) : 0);
}

bool StateSolver::affine() const {
  return spec_.error == model::ErrorType::kAdditive && spec_.season != model::SeasonType::kMultiplicative;
}

bool StateSolver::affine_mu() const {
  return spec_.error == model::ErrorType::kMultiplicative && spec_.season != model::SeasonType::kMultiplicative;
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

namespace {

// Splits x (normal, positive) into a mantissa in [1, 2) and a binary exponent added to
// `exponent`: the sum of log mu_t is accumulated as a product, without a log per step.
inline double Renormalise(double x, int64_t& exponent) {
  uint64_t bits = std::bit_cast<uint64_t>(x);
  exponent += static_cast<int64_t>((bits >> 52) & 0x7ff) - 1023;
  bits = (bits & ~(uint64_t{0x7ff} << 52)) | (uint64_t{1023} << 52);
  return std::bit_cast<double>(bits);
}

// Two doubles in one SSE2 register (GCC/Clang vector extension): the tangent columns are
// processed in pairs, which the compiler does not do by itself at -O2 for loops of unknown
// length over several arrays.
typedef double Pair __attribute__((vector_size(16), may_alias));

// The tangent-linear pass for one shape, all columns of a step fused in one loop. Columns are
// padded to an even count (the pad columns start at zero and stay zero).
// With kMuRows (relative error, additive components) the rows are d mu / d state for every step
// (gaps included) and `residuals` receives mu; grad_log_mu is left alone. Otherwise `jr` (pp,
// zeroed by the caller) receives J'r, summed over the kept rows in order as the rows are made.
// kPairs > 0: the row holds exactly kPairs vectors, and the level and trend tangents and the sums
// stay in registers across steps (no store-to-load round trip on the recursion's dependency chain).
template <typename V, int kPairs, bool kTrend, model::SeasonType kSeason, bool kMultError, bool kMuRows = false>
__attribute__((always_inline)) inline bool TangentPass(std::span<const double> y, const model::Params& params,
                                                       double phi, double level, double trend,
                                                       std::vector<double>& season_work, size_t pp,
                                                       double* __restrict tl, double* __restrict tb,
                                                       double* __restrict t_season, double* __restrict jacobian,
                                                       double* __restrict residuals,
                                                       double* __restrict grad_log_mu, double* __restrict jr,
                                                       bool needs_positive, double* log_mu_sum) {
  constexpr bool kAddSeason = kSeason == model::SeasonType::kAdditive;
  constexpr bool kMultSeason = kSeason == model::SeasonType::kMultiplicative;
  constexpr bool kHasSeason = kSeason != model::SeasonType::kNone;
  const size_t m = season_work.size();
  const double alpha = params.alpha, beta = params.beta, gamma = params.gamma;
  const size_t pairs = kPairs > 0 ? static_cast<size_t>(kPairs) : pp / (sizeof(V) / sizeof(double));
  double l = level, b = kTrend ? trend : 0.0;
  size_t row = 0;
  size_t k = 0;  // seasonal slot of this observation
  constexpr size_t kLocal = kPairs > 0 ? static_cast<size_t>(kPairs) : 1;
  V local_l[kLocal], local_b[kLocal], local_g[kLocal], local_jr[kLocal];
  if constexpr (kPairs > 0) {
    std::memcpy(local_l, tl, sizeof(local_l));
    std::memcpy(local_b, tb, sizeof(local_b));
    std::memcpy(local_g, grad_log_mu, sizeof(local_g));
    std::memcpy(local_jr, jr, sizeof(local_jr));
  }
  V* __restrict vl = kPairs > 0 ? local_l : reinterpret_cast<V*>(tl);
  V* __restrict vb = kPairs > 0 ? local_b : reinterpret_cast<V*>(tb);
  V* __restrict vg = kPairs > 0 ? local_g : reinterpret_cast<V*>(grad_log_mu);
  V* __restrict vjr = kPairs > 0 ? local_jr : reinterpret_cast<V*>(jr);
  // Relative error: sum of log mu_t over the observations as a product of mantissas (four
  // chains) and a binary exponent, as model::EvaluateLikelihood accumulates it.
  double product[4] = {1.0, 1.0, 1.0, 1.0};
  int64_t exponent = 0;
  for (size_t t = 0; t < y.size(); ++t) {
    const double lp = l + phi * b;
    double s = 0.0, mu = lp;
    V* __restrict vs = kHasSeason ? reinterpret_cast<V*>(t_season + k * pp) : nullptr;
    if constexpr (kAddSeason) {
      s = season_work[k];
      mu = lp + s;
    } else if constexpr (kMultSeason) {
      s = season_work[k];
      mu = lp * s;
    }
    if (!std::isfinite(mu) || (needs_positive && !(mu > 0))) return false;
    if (kMultError && !(mu > 1e-300 && mu < 1e300)) return false;
    const double yt = y[t];
    const bool missing = std::isnan(yt);
    const double e = missing ? 0.0 : yt - mu;
    if (kMultError && !kMuRows && !missing) product[t & 3] = Renormalise(product[t & 3] * mu, exponent);
    // d e = -d mu (0 for a gap); e~ = e (or e / s); the state updates as in the kernel.
    const double keep = missing ? 0.0 : 1.0;
    const double inv_s = kMultSeason ? 1.0 / s : 1.0;
    const double e_s2 = kMultSeason ? e * inv_s * inv_s : 0.0;
    const double inv_lp = kMultSeason ? 1.0 / lp : 0.0;
    const double e_lp2 = kMultSeason ? e * inv_lp * inv_lp : 0.0;
    const double scaled = kMultSeason ? e / s : e;
    V* __restrict vj = reinterpret_cast<V*>(jacobian + row * pp);
    const double inv_mu = 1.0 / mu;
    const double c = kMultError ? -yt * inv_mu * inv_mu : 0.0;
    for (size_t i = 0; i < pairs; ++i) {
      const V dlp = kTrend ? vl[i] + phi * vb[i] : vl[i];
      V dmu = dlp, ds{};
      if constexpr (kAddSeason) {
        ds = vs[i];
        dmu = dlp + ds;
      } else if constexpr (kMultSeason) {
        ds = vs[i];
        dmu = dlp * s + lp * ds;
      }
      const V de = -keep * dmu;
      const V dsc = kMultSeason ? de * inv_s - e_s2 * ds : de;
      vl[i] = dlp + alpha * dsc;
      if constexpr (kTrend) vb[i] = phi * vb[i] + beta * dsc;
      if constexpr (kAddSeason) vs[i] = ds + gamma * de;
      if constexpr (kMultSeason) vs[i] = ds + gamma * (de * inv_lp - e_lp2 * dlp);
      if constexpr (kMuRows) {
        vj[i] = dmu;
      } else if constexpr (kMultError) {
        vj[i] = c * dmu;
        vg[i] += keep * inv_mu * dmu;
      } else {
        vj[i] = de;
      }
    }
    l = lp + alpha * scaled;
    if constexpr (kTrend) b = phi * b + beta * scaled;
    if constexpr (kAddSeason) season_work[k] = s + gamma * e;
    if constexpr (kMultSeason) season_work[k] = s + gamma * e / lp;
    if (kHasSeason && ++k == m) k = 0;
    if constexpr (kMuRows) {
      residuals[row] = mu;
      ++row;
      continue;
    }
    if (missing) continue;
    const double r = kMultError ? e / mu : e;
    residuals[row] = r;
    for (size_t i = 0; i < pairs; ++i) vjr[i] += r * vj[i];
    ++row;
  }
  if constexpr (kPairs > 0) {
    std::memcpy(grad_log_mu, local_g, sizeof(local_g));
    std::memcpy(jr, local_jr, sizeof(local_jr));
  }
  if constexpr (kMultError && !kMuRows) {
    double sum = static_cast<double>(exponent) * std::numbers::ln2;
    for (double q : product) sum += std::log(q);
    *log_mu_sum = sum;
  }
  return true;
}

// Four doubles (AVX): the same pass in 4-wide registers where the CPU has AVX2. No fused
// multiply-adds are enabled, so both widths give bit-identical tangents. The buffers are
// 32-byte aligned at least (AlignedVector, rows of a multiple of 4 doubles).
typedef double Quad __attribute__((vector_size(32), may_alias));

template <bool kTrend, model::SeasonType kSeason, bool kMultError, bool kMuRows>
__attribute__((target("avx2"))) bool TangentPassAvx2(std::span<const double> y, const model::Params& params, double phi,
                                                     double level, double trend, std::vector<double>& season_work,
                                                     size_t pp, double* tl, double* tb, double* t_season,
                                                     double* jacobian, double* residuals, double* grad_log_mu,
                                                     double* jr, bool needs_positive, double* log_mu_sum) {
  if (pp == 4) {
    return TangentPass<Quad, 1, kTrend, kSeason, kMultError, kMuRows>(y, params, phi, level, trend, season_work, pp, tl,
                                                                      tb, t_season, jacobian, residuals, grad_log_mu,
                                                                      jr, needs_positive, log_mu_sum);
  }
  return TangentPass<Quad, 0, kTrend, kSeason, kMultError, kMuRows>(y, params, phi, level, trend, season_work, pp, tl,
                                                                    tb, t_season, jacobian, residuals, grad_log_mu, jr,
                                                                    needs_positive, log_mu_sum);
}

// Eight doubles (AVX-512) where the CPU has it: rows are then a multiple of 8 doubles, 64-byte
// aligned. Contraction into fused multiply-adds is off here (AVX-512 has them), so the tangents
// stay bit-identical to the 4- and 2-wide passes.
typedef double Oct __attribute__((vector_size(64), may_alias));

// GCC contracts a * b + c into a fused multiply-add wherever the target has one (its default
// -ffp-contract=fast); functions marked with this keep the products and sums separate. Clang has
// no such attribute (and contracts only within one expression).
#if defined(__clang__)
#define PLIMSOLL_NO_CONTRACT
#else
#define PLIMSOLL_NO_CONTRACT , optimize("fp-contract=off")
#endif

template <bool kTrend, model::SeasonType kSeason, bool kMultError, bool kMuRows>
__attribute__((target("avx512f") PLIMSOLL_NO_CONTRACT)) bool TangentPassAvx512(
    std::span<const double> y, const model::Params& params, double phi, double level, double trend,
    std::vector<double>& season_work, size_t pp, double* tl, double* tb, double* t_season, double* jacobian,
    double* residuals, double* grad_log_mu, double* jr, bool needs_positive, double* log_mu_sum) {
  auto fixed = [&]<int kPairs>() {
    return TangentPass<Oct, kPairs, kTrend, kSeason, kMultError, kMuRows>(y, params, phi, level, trend, season_work, pp,
                                                                          tl, tb, t_season, jacobian, residuals,
                                                                          grad_log_mu, jr, needs_positive, log_mu_sum);
  };
  switch (pp) {
    case 8: return fixed.template operator()<1>();
    case 16: return fixed.template operator()<2>();
    case 24: return fixed.template operator()<3>();
    case 32: return fixed.template operator()<4>();
    default: return fixed.template operator()<0>();
  }
}

// The gradient of -loglik with respect to (alpha, beta, gamma, phi) with the state held fixed: one
// forward pass carrying the four tangents (lanes alpha, beta, gamma, phi of one 4-wide vector) of
// the level, the trend and every seasonal slot. False when infeasible. Without AVX the compiler
// splits each 4-wide operation into two 2-wide ones, lane by lane the same arithmetic.
template <bool kTrend, model::SeasonType kSeason, bool kMultError>
__attribute__((always_inline)) inline bool ParamGradientPass(std::span<const double> y, const model::Params& params,
                                                             bool damped, double level, double trend,
                                                             const std::vector<double>& season, bool needs_positive,
                                                             std::vector<double>& season_work, AlignedVector& t_season,
                                                             double grad[4]) {
  constexpr bool kAddSeason = kSeason == model::SeasonType::kAdditive;
  constexpr bool kMultSeason = kSeason == model::SeasonType::kMultiplicative;
  constexpr bool kHasSeason = kSeason != model::SeasonType::kNone;
  const size_t m = season.size();
  season_work = season;
  t_season.assign(kHasSeason ? 4 * m : 0, 0.0);
  const double alpha = params.alpha, beta = params.beta, gamma = params.gamma;
  const double phi = damped ? params.phi : 1.0;
  const double dphi = damped ? 1.0 : 0.0;  // phi's own lane is live only for damped trends
  Quad dl{}, db{};                         // d level, d trend
  Quad g{};                                // sum of residual * d residual
  Quad h{};                                // sum of d mu / mu (relative error)
  double l = level, b = kTrend ? trend : 0.0;
  double sse = 0.0;
  int n = 0;
  size_t k = 0;
  for (size_t t = 0; t < y.size(); ++t) {
    const double lp = l + phi * b;
    const Quad dlp = kTrend ? dl + phi * db + Quad{0.0, 0.0, 0.0, dphi * b} : dl;
    double s = 0.0, mu = lp;
    Quad ds{}, dmu = dlp;
    Quad* ts = kHasSeason ? reinterpret_cast<Quad*>(t_season.data() + 4 * k) : nullptr;
    if constexpr (kHasSeason) {
      s = season_work[k];
      ds = *ts;
    }
    if constexpr (kAddSeason) {
      mu = lp + s;
      dmu = dlp + ds;
    } else if constexpr (kMultSeason) {
      mu = lp * s;
      dmu = dlp * s + lp * ds;
    }
    if (!std::isfinite(mu) || (needs_positive && !(mu > 0))) return false;
    const double yt = y[t];
    const bool missing = std::isnan(yt);
    const double e = missing ? 0.0 : yt - mu;
    const double keep = missing ? 0.0 : 1.0;
    const Quad de = -keep * dmu;
    double scaled = e;
    Quad dsc = de;
    if constexpr (kMultSeason) {
      scaled = e / s;
      const double inv_s = 1.0 / s, e_s2 = e * inv_s * inv_s;
      dsc = de * inv_s - e_s2 * ds;
    }
    dl = dlp + alpha * dsc + Quad{scaled, 0.0, 0.0, 0.0};
    if constexpr (kTrend) db = phi * db + beta * dsc + Quad{0.0, scaled, 0.0, dphi * b};
    if constexpr (kAddSeason) {
      *ts = ds + gamma * de + Quad{0.0, 0.0, e, 0.0};
      season_work[k] = s + gamma * e;
    } else if constexpr (kMultSeason) {
      const double inv_lp = 1.0 / lp, e_lp2 = e * inv_lp * inv_lp;
      *ts = ds + gamma * (de * inv_lp - e_lp2 * dlp) + Quad{0.0, 0.0, e * inv_lp, 0.0};
      season_work[k] = s + gamma * e / lp;
    }
    l = lp + alpha * scaled;
    if constexpr (kTrend) b = phi * b + beta * scaled;
    if (kHasSeason && ++k == m) k = 0;
    if (missing) continue;
    ++n;
    if constexpr (kMultError) {
      const double r = e / mu;
      const double c = -r * yt / (mu * mu);  // r * d r / d mu
      sse += r * r;
      g += c * dmu;
      const double inv_mu = 1.0 / mu;
      h += inv_mu * dmu;
    } else {
      sse += e * e;
      g += e * de;
    }
  }
  if (n == 0 || !(sse > 0) || !std::isfinite(sse)) return false;
  const double w = n / sse;
  const Quad d = w * g + h;
  grad[0] = d[0];
  grad[1] = kTrend ? d[1] : 0.0;
  grad[2] = kHasSeason ? d[2] : 0.0;
  grad[3] = kTrend && damped ? d[3] : 0.0;
  return std::isfinite(d[0] + d[1] + d[2] + d[3]);
}

template <bool kTrend, model::SeasonType kSeason, bool kMultError>
__attribute__((target("avx2"))) bool ParamGradientPassAvx2(std::span<const double> y, const model::Params& params,
                                                           bool damped, double level, double trend,
                                                           const std::vector<double>& season, bool needs_positive,
                                                           std::vector<double>& season_work, AlignedVector& t_season,
                                                           double grad[4]) {
  return ParamGradientPass<kTrend, kSeason, kMultError>(y, params, damped, level, trend, season, needs_positive,
                                                        season_work, t_season, grad);
}

template <bool kTrend, model::SeasonType kSeason, bool kMultError>
bool ParamGradientPassBase(std::span<const double> y, const model::Params& params, bool damped, double level,
                           double trend, const std::vector<double>& season, bool needs_positive,
                           std::vector<double>& season_work, AlignedVector& t_season, double grad[4]) {
  return ParamGradientPass<kTrend, kSeason, kMultError>(y, params, damped, level, trend, season, needs_positive,
                                                        season_work, t_season, grad);
}

}  // namespace

namespace {

// Calls run.template operator()<kTrend, kSeason, kMultError>() for the shape of `spec`: one
// instantiation per (trend present, season type, error type).
template <typename Run>
bool DispatchShape(const model::ModelSpec& spec, Run& run) {
  auto by_season = [&]<bool kTrend, bool kMultError>() {
    switch (spec.season) {
      case model::SeasonType::kAdditive:
        return run.template operator()<kTrend, model::SeasonType::kAdditive, kMultError>();
      case model::SeasonType::kMultiplicative:
        return run.template operator()<kTrend, model::SeasonType::kMultiplicative, kMultError>();
      case model::SeasonType::kNone: break;
    }
    return run.template operator()<kTrend, model::SeasonType::kNone, kMultError>();
  };
  const bool mult_error = spec.error == model::ErrorType::kMultiplicative;
  if (spec.has_trend()) {
    return mult_error ? by_season.template operator()<true, true>() : by_season.template operator()<true, false>();
  }
  return mult_error ? by_season.template operator()<false, true>() : by_season.template operator()<false, false>();
}

}  // namespace

bool StateSolver::ParamGradient(const model::Params& params, double level, double trend,
                                  const std::vector<double>& season, double grad[4]) {
  const bool positive = spec_.needs_positive_data();
  const bool avx2 = __builtin_cpu_supports("avx2");
  auto run = [&]<bool kTrend, model::SeasonType kSeason, bool kMultError>() {
    if (avx2) {
      return ParamGradientPassAvx2<kTrend, kSeason, kMultError>(y_, params, spec_.damped(), level, trend, season,
                                                                positive, season_work_, t_param_season_, grad);
    }
    return ParamGradientPassBase<kTrend, kSeason, kMultError>(y_, params, spec_.damped(), level, trend, season,
                                                              positive, season_work_, t_param_season_, grad);
  };
  return DispatchShape(spec_, run);
}

bool StateSolver::Tangents(const model::Params& params, double level, double trend,
                           const std::vector<double>& season, bool mu_rows, bool impulse) {
  const size_t pp = impulse ? 4 : static_cast<size_t>(pp_);
  const size_t m = season.size();
  const bool has_trend = spec_.has_trend();
  std::fill(t_level_.begin(), t_level_.end(), 0.0);
  std::fill(t_trend_.begin(), t_trend_.end(), 0.0);
  std::fill(t_season_.begin(), t_season_.end(), 0.0);
  std::fill(grad_log_mu_.begin(), grad_log_mu_.end(), 0.0);
  std::fill(jr_.begin(), jr_.end(), 0.0);
  t_level_[0] = 1.0;
  if (has_trend) t_trend_[1] = 1.0;
  if (impulse) {
    t_season_[2] = 1.0;  // the first chronological seasonal state alone
  } else if (estimate_season_) {
    // Free seasonal coordinates are the first m - 1 chronological states; the last follows from
    // the normalisation (sum 0 or mean 1), so it moves by minus their sum.
    const size_t o = has_trend ? 2 : 1;
    for (size_t j = 0; j + 1 < m; ++j) {
      t_season_[j * pp + o + j] = 1.0;
      t_season_[(m - 1) * pp + o + j] = -1.0;
    }
  }
  season_work_ = season;
  const double phi = spec_.damped() ? params.phi : 1.0;
  const bool positive = spec_.needs_positive_data();
  const bool avx2 = __builtin_cpu_supports("avx2");
  const bool avx512 = wide_ && !impulse;
  double* rows = impulse ? impulse_.data() : jacobian_.data();
  double log_mu_sum = 0.0;
  auto run = [&]<bool kTrend, model::SeasonType kSeason, bool kMultError>() {
    auto pass = [&]<bool kMuRows>(double* out) {
      if (avx512) {
        return TangentPassAvx512<kTrend, kSeason, kMultError, kMuRows>(y_, params, phi, level, trend, season_work_,
                                                                       pp, t_level_.data(), t_trend_.data(),
                                                                       t_season_.data(), rows, out,
                                                                       grad_log_mu_.data(), jr_.data(), positive,
                                                                       &log_mu_sum);
      }
      if (avx2) {
        return TangentPassAvx2<kTrend, kSeason, kMultError, kMuRows>(y_, params, phi, level, trend, season_work_, pp,
                                                                     t_level_.data(), t_trend_.data(),
                                                                     t_season_.data(), rows, out,
                                                                     grad_log_mu_.data(), jr_.data(), positive,
                                                                     &log_mu_sum);
      }
      return TangentPass<Pair, 0, kTrend, kSeason, kMultError, kMuRows>(y_, params, phi, level, trend, season_work_, pp,
                                                                     t_level_.data(), t_trend_.data(),
                                                                     t_season_.data(), rows, out,
                                                                     grad_log_mu_.data(), jr_.data(), positive,
                                                                     &log_mu_sum);
    };
    if constexpr (kMultError && kSeason != model::SeasonType::kMultiplicative) {
      if (mu_rows) return pass.template operator()<true>(mu0_.data());
    }
    return pass.template operator()<false>(residuals_.data());
  };
  if (!DispatchShape(spec_, run)) return false;
  if (!mu_rows) {
    const double sse = Eigen::Map<const Eigen::VectorXd>(residuals_.data(), n_obs_).squaredNorm();
    const double n = n_obs_;
    tangent_objective_ = sse > 0 && std::isfinite(sse)
                             ? 0.5 * n * (std::log(2.0 * std::numbers::pi * sse / n) + 1.0) + log_mu_sum
                             : kInf;
  }
  return true;
}

namespace {

// out[a * mw + j] += sum over v < n of c[v] * xs[a][v + j], for lags j < mw (mw a multiple of the
// vector width; xs[a] zero from n on and readable up to n + mw). Lags run across the vector
// lanes; two accumulator sets over alternate v halve the dependency chains. Each sum runs over v
// in a fixed order (deterministic).
template <typename V, int kArrays>
__attribute__((always_inline)) inline void LagSums(const double* c, const double* const* xs, size_t n, size_t mw,
                                                   size_t lag_begin, size_t lag_end, double* out) {
  constexpr size_t kW = sizeof(V) / sizeof(double);
  for (size_t j0 = lag_begin; j0 < lag_end; j0 += kW) {
    V acc0[kArrays] = {}, acc1[kArrays] = {};
    size_t v = 0;
    for (; v + 1 < n; v += 2) {
      const double c0 = c[v], c1 = c[v + 1];
      for (int a = 0; a < kArrays; ++a) {
        V x0, x1;
        __builtin_memcpy(&x0, xs[a] + v + j0, sizeof(V));
        __builtin_memcpy(&x1, xs[a] + v + 1 + j0, sizeof(V));
        acc0[a] += c0 * x0;
        acc1[a] += c1 * x1;
      }
    }
    for (; v < n; ++v) {
      for (int a = 0; a < kArrays; ++a) {
        V x0;
        __builtin_memcpy(&x0, xs[a] + v + j0, sizeof(V));
        acc0[a] += c[v] * x0;
      }
    }
    for (int a = 0; a < kArrays; ++a) {
      const V sum = acc0[a] + acc1[a];
      for (size_t l = 0; l < kW; ++l) out[static_cast<size_t>(a) * mw + j0 + l] = sum[l];
    }
  }
}

template <int kArrays>
__attribute__((target("avx2,fma"))) void LagSumsAvx2(const double* c, const double* const* xs, size_t n, size_t mw,
                                                     double* out) {
  LagSums<Quad, kArrays>(c, xs, n, mw, 0, mw, out);
}

// 8 lags per register, the last 4 (mw not a multiple of 8) in a 4-wide one; per lag the same
// fused multiply-add chains as LagSumsAvx2, so the same bits.
template <int kArrays>
__attribute__((target("avx512f,fma"))) void LagSumsAvx512(const double* c, const double* const* xs, size_t n,
                                                          size_t mw, double* out) {
  const size_t wide = mw / 8 * 8;
  LagSums<Oct, kArrays>(c, xs, n, mw, 0, wide, out);
  LagSums<Quad, kArrays>(c, xs, n, mw, wide, mw, out);
}

// Lag sums of 3 or 4 arrays (see LagSums), in 8- or 4-wide registers with fused multiply-adds
// where the CPU has AVX-512 or AVX2 and FMA.
void LagSumsAny(const double* c, const double* const* xs, int arrays, size_t n, size_t mw, double* out) {
  const bool avx512 = __builtin_cpu_supports("avx512f") && __builtin_cpu_supports("fma");
  const bool avx2 = __builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma");
  if (arrays == 4) {
    avx512 ? LagSumsAvx512<4>(c, xs, n, mw, out)
    : avx2 ? LagSumsAvx2<4>(c, xs, n, mw, out)
           : LagSums<Pair, 4>(c, xs, n, mw, 0, mw, out);
  } else {
    avx512 ? LagSumsAvx512<3>(c, xs, n, mw, out)
    : avx2 ? LagSumsAvx2<3>(c, xs, n, mw, out)
           : LagSums<Pair, 3>(c, xs, n, mw, 0, mw, out);
  }
}

// out[t] += sum over j < min(m, t + 1) of d[j] * c[t - j], the terms added to out[t] one by one in
// order of j, each product rounded before its addition (no fused multiply-adds): the same bits
// as the plain loops, which made m sweeps over `out`; here each out[t] stays in a register.
template <typename V>
__attribute__((always_inline)) inline void ShiftedSums(const double* d, size_t m, const double* c, size_t n,
                                                      double* out) {
  constexpr size_t kW = sizeof(V) / sizeof(double);
  size_t t = 0;
  for (; t < std::min(m, n); ++t) {
    for (size_t j = 0; j <= t; ++j) out[t] += d[j] * c[t - j];
  }
  for (; t + kW <= n; t += kW) {
    V acc;
    __builtin_memcpy(&acc, out + t, sizeof(V));
    for (size_t j = 0; j < m; ++j) {
      V x;
      __builtin_memcpy(&x, c + t - j, sizeof(V));
      acc = acc + d[j] * x;
    }
    __builtin_memcpy(out + t, &acc, sizeof(V));
  }
  for (; t < n; ++t) {
    for (size_t j = 0; j < m; ++j) out[t] += d[j] * c[t - j];
  }
}

__attribute__((target("avx512f") PLIMSOLL_NO_CONTRACT)) void ShiftedSumsAvx512(const double* d, size_t m,
                                                                                        const double* c, size_t n,
                                                                                        double* out) {
  ShiftedSums<Oct>(d, m, c, n, out);
}

__attribute__((target("avx2"))) void ShiftedSumsAvx2(const double* d, size_t m, const double* c, size_t n,
                                                     double* out) {
  ShiftedSums<Quad>(d, m, c, n, out);
}

void AddShiftedSums(const double* d, size_t m, const double* c, size_t n, double* out) {
  if (__builtin_cpu_supports("avx512f")) {
    ShiftedSumsAvx512(d, m, c, n, out);
  } else if (__builtin_cpu_supports("avx2")) {
    ShiftedSumsAvx2(d, m, c, n, out);
  } else {
    ShiftedSums<Pair>(d, m, c, n, out);
  }
}

// J'w and J x for n rows of pp doubles (pp a multiple of 8, 64-byte aligned rows), 8-wide with
// fused multiply-adds: J'w sums the rows in time order in two interleaved accumulator sets (even
// and odd rows); J x sums each row's 8-wide partial products, then the lanes.
__attribute__((target("avx512f"))) void RowsTransposedTimes(const double* rows, size_t n, size_t pp, const double* w,
                                                            double* out) {
  const size_t q = pp / 8;
  __m512d even[4] = {}, odd[4] = {};
  size_t t = 0;
  for (; t + 1 < n; t += 2) {
    const __m512d w0 = _mm512_set1_pd(w[t]), w1 = _mm512_set1_pd(w[t + 1]);
    const double* r0 = rows + t * pp;
    const double* r1 = r0 + pp;
    for (size_t i = 0; i < q; ++i) {
      even[i] = _mm512_fmadd_pd(w0, _mm512_load_pd(r0 + 8 * i), even[i]);
      odd[i] = _mm512_fmadd_pd(w1, _mm512_load_pd(r1 + 8 * i), odd[i]);
    }
  }
  for (; t < n; ++t) {
    const __m512d w0 = _mm512_set1_pd(w[t]);
    for (size_t i = 0; i < q; ++i) even[i] = _mm512_fmadd_pd(w0, _mm512_load_pd(rows + t * pp + 8 * i), even[i]);
  }
  for (size_t i = 0; i < q; ++i) _mm512_storeu_pd(out + 8 * i, _mm512_add_pd(even[i], odd[i]));
}

__attribute__((target("avx512f"))) void RowsTimes(const double* rows, size_t n, size_t pp, const double* x,
                                                  double* out) {
  const size_t q = pp / 8;
  Oct xs[4];
  for (size_t i = 0; i < q; ++i) __builtin_memcpy(&xs[i], x + 8 * i, sizeof(Oct));
  for (size_t t = 0; t < n; ++t) {
    const Oct* row = reinterpret_cast<const Oct*>(rows + t * pp);
    Oct acc = row[0] * xs[0];
    for (size_t i = 1; i < q; ++i) acc = _mm512_fmadd_pd(row[i], xs[i], acc);
    out[t] = ((acc[0] + acc[1]) + (acc[2] + acc[3])) + ((acc[4] + acc[5]) + (acc[6] + acc[7]));
  }
}

}  // namespace

double StateSolver::MuObjective(const double* mu, double* inv_mu, double* resid) const {
  double sse = 0.0;
  // Four running products (independent dependency chains), each kept in [1, 2) by Renormalise.
  double product[4] = {1.0, 1.0, 1.0, 1.0};
  int64_t exponent = 0;
  const size_t len = y_.size();
  for (size_t t = 0; t < len; ++t) {
    const double m = mu[t];
    if (!(m > 1e-300 && m < 1e300)) return kInf;
    const double yt = y_[t];
    const double inv = 1.0 / m;
    inv_mu[t] = inv;
    if (std::isnan(yt)) {
      resid[t] = 0.0;
      continue;
    }
    const double r = (yt - m) * inv;
    resid[t] = r;
    sse += r * r;
    product[t & 3] = Renormalise(product[t & 3] * m, exponent);
  }
  if (!(sse > 0) || !std::isfinite(sse)) return kInf;
  const double n = n_obs_;
  double log_product = 0.0;
  for (double q : product) log_product += std::log(q);
  return 0.5 * n * (std::log(2.0 * std::numbers::pi * sse / n) + 1.0) + log_product +
         static_cast<double>(exponent) * std::numbers::ln2;
}

void StateSolver::Displace(const Eigen::VectorXd& delta, double lambda, double level, double trend,
                           const std::vector<double>& season, double& l, double& b, std::vector<double>& s) const {
  const size_t m = season.size();
  const size_t o = spec_.has_trend() ? 2 : 1;
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
}

double StateSolver::SolveAffineMu(const model::Params& params, double& level, double& trend,
                                  std::vector<double>& season, int* passes, bool coarse) {
  if (!(level > 0)) return kInf;
  ++*passes;
  if (!Tangents(params, level, trend, season, /*mu_rows=*/true, /*impulse=*/shifted_)) return kInf;
  // Without gaps the rows of J_mu are not stored: the scaled rows c_t J_mu,t (c_t = d r_t / d mu_t
  // at the last refresh, never 0 for positive data) are built from the impulse columns, and the
  // products with J_mu divide by c_t (see below).
  if (shifted_) ReverseSeasonalImpulse();
  const Eigen::Index p = p_;
  const Eigen::Index len = static_cast<Eigen::Index>(y_.size());
  const size_t pp = static_cast<size_t>(pp_);
  mu_ = mu0_;
  double f = MuObjective(mu_.data(), inv_mu_.data(), resid_.data());
  if (!std::isfinite(f)) return kInf;
  const JacobianMap jmu(shifted_ ? scaled_.data() : jacobian_.data(), len, p, Eigen::OuterStride<>(pp_));
  Eigen::Map<const Eigen::VectorXd> w(weights_.data(), len);
  Eigen::Map<Eigen::VectorXd> jd(jd_.data(), len);
  Eigen::VectorXd total = Eigen::VectorXd::Zero(p);
  Eigen::LDLT<Eigen::MatrixXd, Eigen::Lower> factor;
  bool refresh = true;
  const double n = n_obs_;
  for (int step_count = 0; step_count < (coarse ? 1 : kMaxSteps); ++step_count) {
    // r_t = (y_t - mu_t) / mu_t; d r_t / d mu_t = -y_t / mu_t^2. Gradient of n/2 log S + sum log mu
    // scaled by S/n: J_mu' (r dr/dmu + (S/n) / mu).
    const double sse = Eigen::Map<const Eigen::VectorXd>(resid_.data(), len).squaredNorm();
    const double scale = sse / n;
    for (Eigen::Index t = 0, row = 0; t < len; ++t) {
      const size_t ti = static_cast<size_t>(t);
      const double yt = y_[ti];
      if (std::isnan(yt)) {
        weights_[ti] = 0.0;
        continue;
      }
      const double inv = inv_mu_[ti], r = resid_[ti], c = -yt * inv * inv;
      weights_[ti] = c * r + scale * inv;
      if (shifted_) {
        if (refresh) row_scale_[ti] = c;
        weights_[ti] /= row_scale_[ti];
      } else if (refresh) {
        const double* src = jacobian_.data() + ti * pp;
        double* dst = scaled_.data() + static_cast<size_t>(row) * pp;
        for (size_t i = 0; i < pp; ++i) dst[i] = c * src[i];
      }
      ++row;
    }
    if (refresh) {
      if (shifted_) ScaledRowsFromImpulse(row_scale_.data());
      Eigen::MatrixXd h = Gram(scaled_);
      h.diagonal().array() += 1e-12 * std::max(h.diagonal().maxCoeff(), 1e-300);
      factor.compute(h);
      refresh = false;
    }
    Eigen::VectorXd g(p);
    if (wide_ && pp <= 32) {
      RowsTransposedTimes(jmu.data(), static_cast<size_t>(len), pp, weights_.data(), padded_.data());
      g = Eigen::Map<const Eigen::VectorXd>(padded_.data(), p);
    } else {
      g.noalias() = jmu.transpose() * w;
    }
    const Eigen::VectorXd delta = -factor.solve(g);
    if (!delta.allFinite()) break;
    const double predicted = -0.5 * n / sse * g.dot(delta);
    if (!(predicted > kStepTolerance * std::fabs(f))) break;
    if (wide_ && pp <= 32) {
      std::copy(delta.begin(), delta.end(), padded_.begin());  // the pad entries stay 0
      RowsTimes(jmu.data(), static_cast<size_t>(len), pp, padded_.data(), jd_.data());
    } else {
      jd.noalias() = jmu * delta;
    }
    if (shifted_) jd.array() /= Eigen::Map<const Eigen::ArrayXd>(row_scale_.data(), len);
    double f_new = f;
    const double lambda = Backtrack(f, f_new, [&](double step) -> double {
      if (!(level + total[0] + step * delta[0] > 0)) return NAN;
      for (size_t t = 0; t < mu_.size(); ++t) trial_mu_[t] = mu_[t] + step * jd_[t];
      return MuObjective(trial_mu_.data(), trial_inv_mu_.data(), trial_resid_.data());
    });
    if (lambda == 0.0) break;
    if (lambda < 1.0) refresh = true;
    const double gain = f - f_new;
    f = f_new;
    total += lambda * delta;
    mu_.swap(trial_mu_);
    inv_mu_.swap(trial_inv_mu_);
    resid_.swap(trial_resid_);
    if (gain <= kStepTolerance * std::fabs(f) || (lambda == 1.0 && gain <= kSmallGain * std::fabs(f))) break;
  }
  double l = 0, b = 0;
  Displace(total, 1.0, level, trend, season, l, b, trial_season_);
  level = l;
  trend = b;
  season.swap(trial_season_);
  return f;
}

void StateSolver::ReverseSeasonalImpulse() {
  const size_t n = y_.size(), m = season_work_.size();
  double* reversed = columns_.data();
  for (size_t t = 0; t < n; ++t) reversed[n - 1 - t] = impulse_[4 * t + 2];
  std::fill(reversed + n, reversed + n + m, 0.0);
}

void StateSolver::ScaledRowsFromImpulse(const double* scale) {
  const size_t n = y_.size(), m = season_work_.size(), pp = static_cast<size_t>(pp_);
  const size_t o = spec_.has_trend() ? 2 : 1;
  // Row t's seasonal part C[t - j] (0 for j > t) is the contiguous run reversed[n - 1 - t + j].
  const double* reversed = columns_.data();
  for (size_t t = 0; t < n; ++t) {
    const double* src = impulse_.data() + 4 * t;
    const double* run = reversed + (n - 1 - t);
    const double c = scale[t];
    double* dst = scaled_.data() + t * pp;
    dst[0] = c * src[0];
    if (o == 2) dst[1] = c * src[1];
    // Free seasonal coordinate j moves state j by +1 and state m - 1 by -1.
    const double last = run[m - 1];
    for (size_t j = 0; j + 1 < m; ++j) dst[o + j] = c * (run[j] - last);
    for (size_t i = o + m - 1; i < pp; ++i) dst[i] = 0.0;
  }
}

double StateSolver::SolveShifted(const model::Params& params, double& level, double& trend,
                                 std::vector<double>& season, int* passes) {
  ++*passes;
  if (!Tangents(params, level, trend, season, /*mu_rows=*/false, /*impulse=*/true)) return kInf;
  const size_t n = y_.size(), m = season.size(), mw = lag_width_;
  const bool has_trend = spec_.has_trend();
  const size_t o = has_trend ? 2 : 1;
  const size_t stride = n + mw + 4;
  // Columns of d residual / d raw state: level, trend, first seasonal state (C); residuals r.
  double* col_l = columns_.data();
  double* col_b = col_l + stride;
  double* col_c = col_b + stride;
  double* col_r = col_c + stride;
  for (size_t t = 0; t < n; ++t) {
    col_l[t] = impulse_[4 * t];
    col_b[t] = impulse_[4 * t + 1];
    col_c[t] = impulse_[4 * t + 2];
    col_r[t] = residuals_[t];
  }
  // Seasonal state j's column is C shifted down by j, so every product with it is a lag sum:
  // lags_[a * mw + j] = sum_v C[v] X_a[v + j] for X = C, r, L (, B).
  const double* xs[4] = {col_c, col_r, col_l, col_b};
  LagSumsAny(col_c, xs, has_trend ? 4 : 3, n, mw, lags_.data());
  const double* cc = lags_.data();
  const double* rc = cc + mw;
  const double* lc = rc + mw;
  const double* bc = lc + mw;
  // Raw Gram (level, trend, m seasonal states) and gradient J'r.
  const Eigen::Index raw = static_cast<Eigen::Index>(o + m);
  Eigen::MatrixXd g_raw(raw, raw);
  Eigen::VectorXd v_raw(raw);
  const Eigen::Index rows = static_cast<Eigen::Index>(n);
  Eigen::Map<const Eigen::VectorXd> l_vec(col_l, rows), b_vec(col_b, rows), r_vec(col_r, rows);
  g_raw(0, 0) = l_vec.squaredNorm();
  v_raw[0] = l_vec.dot(r_vec);
  if (has_trend) {
    g_raw(1, 0) = g_raw(0, 1) = l_vec.dot(b_vec);
    g_raw(1, 1) = b_vec.squaredNorm();
    v_raw[1] = b_vec.dot(r_vec);
  }
  for (size_t j = 0; j < m; ++j) {
    const Eigen::Index sj = static_cast<Eigen::Index>(o + j);
    g_raw(sj, 0) = g_raw(0, sj) = lc[j];
    if (has_trend) g_raw(sj, 1) = g_raw(1, sj) = bc[j];
    v_raw[sj] = rc[j];
  }
  // States i <= k: sum over v < n - k of C[v] C[v + k - i], i.e. the full lag sum minus its last
  // i terms.
  for (size_t l = 0; l < m; ++l) {
    double tail = 0.0;
    for (size_t i = 0; i + l < m; ++i) {
      if (i > 0) tail += col_c[n - l - i] * col_c[n - i];
      const Eigen::Index si = static_cast<Eigen::Index>(o + i), sk = static_cast<Eigen::Index>(o + i + l);
      g_raw(sk, si) = g_raw(si, sk) = cc[l] - tail;
    }
  }
  // Free coordinates: the last seasonal state moves by minus the sum of the others.
  const Eigen::Index p = p_, last = raw - 1;
  Eigen::MatrixXd h(p, p);
  Eigen::VectorXd g(p);
  auto seasonal = [&](Eigen::Index i) { return i >= static_cast<Eigen::Index>(o); };
  for (Eigen::Index i = 0; i < p; ++i) {
    g[i] = v_raw[i] - (seasonal(i) ? v_raw[last] : 0.0);
    for (Eigen::Index k = 0; k <= i; ++k) {
      double v = g_raw(i, k);
      if (seasonal(i)) v -= g_raw(last, k);
      if (seasonal(k)) v -= g_raw(i, last);
      if (seasonal(i) && seasonal(k)) v += g_raw(last, last);
      h(i, k) = v;
    }
  }
  h.diagonal().array() += 1e-12 * std::max(h.diagonal().maxCoeff(), 1e-300);
  const Eigen::VectorXd delta = -(h.selfadjointView<Eigen::Lower>().ldlt().solve(g));
  Eigen::Map<const Eigen::VectorXd> r(residuals_.data(), static_cast<Eigen::Index>(n));
  const double sse_start = r.squaredNorm();
  double sse = kInf;
  if (delta.allFinite()) {
    // Residuals at the solution, r + J delta, with the seasonal part as shifted copies of C.
    double* out = jd_shift_.data();
    for (size_t t = 0; t < n; ++t) out[t] = col_r[t] + delta[0] * col_l[t] + (has_trend ? delta[1] * col_b[t] : 0.0);
    double moved = 0.0;
    for (size_t j = 0; j < m; ++j) {
      const double dj = j + 1 < m ? delta[static_cast<Eigen::Index>(o + j)] : -moved;
      moved += dj;
      shift_[j] = dj;
    }
    AddShiftedSums(shift_.data(), m, col_c, n, out);
    sse = Eigen::Map<const Eigen::VectorXd>(out, static_cast<Eigen::Index>(n)).squaredNorm();
  }
  return TakeAffineStep(delta, sse, sse_start, level, trend, season);
}

double StateSolver::TakeAffineStep(const Eigen::VectorXd& delta, double sse, double sse_start, double& level,
                                   double& trend, std::vector<double>& season) {
  if (sse < sse_start) {
    double l = 0, b = 0;
    Displace(delta, 1.0, level, trend, season, l, b, trial_season_);
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

double StateSolver::Solve(const model::Params& params, double& level, double& trend,
                          std::vector<double>& season, int* passes, bool coarse) {
  // Additive error with additive components: residuals affine in the state, so one step is the
  // exact optimum and the residuals there are r + J delta (no second pass needed).
  const Eigen::Index p = p_;
  auto move = [&](const Eigen::VectorXd& delta, double lambda, double& l, double& b, std::vector<double>& s) {
    Displace(delta, lambda, level, trend, season, l, b, s);
  };
  if (affine_mu()) return SolveAffineMu(params, level, trend, season, passes, coarse);
  if (affine() && shifted_) return SolveShifted(params, level, trend, season, passes);
  if (affine()) {
    ++*passes;
    if (!Tangents(params, level, trend, season)) return kInf;
    const JacobianMap jac(jacobian_.data(), n_obs_, p, Eigen::OuterStride<>(pp_));
    Eigen::Map<const Eigen::VectorXd> r(residuals_.data(), n_obs_);
    Eigen::MatrixXd h = Gram(jacobian_);
    h.diagonal().array() += 1e-12 * std::max(h.diagonal().maxCoeff(), 1e-300);
    const Eigen::VectorXd delta = -(h.selfadjointView<Eigen::Lower>().ldlt().solve(JacobianTimesResiduals()));
    const double sse_start = r.squaredNorm();
    const double sse = delta.allFinite() ? (r + jac * delta).squaredNorm() : kInf;
    return TakeAffineStep(delta, sse, sse_start, level, trend, season);
  }
  // Infeasible starts as in Objective; the start's -loglik comes with the first tangent pass.
  if (spec_.needs_positive_data() && !(level > 0)) return kInf;
  if (spec_.season == model::SeasonType::kMultiplicative) {
    for (double s : season) {
      if (!(s > 0)) return kInf;
    }
  }
  double f = kInf;
  // The Hessian J'J (O(n p^2), the dearest part) is formed at the first step and reused by the
  // later (chord) steps while full steps are accepted: near the optimum it changes little
  // between steps, and the line search guards the rest.
  Eigen::LDLT<Eigen::MatrixXd, Eigen::Lower> factor;
  bool refresh = true;
  for (int step_count = 0; step_count < (coarse ? 1 : kMaxSteps); ++step_count) {
    ++*passes;
    if (!Tangents(params, level, trend, season)) break;
    if (step_count == 0) f = tangent_objective_;
    if (!std::isfinite(f)) break;
    Eigen::Map<const Eigen::VectorXd> r(residuals_.data(), n_obs_);
    if (refresh) {
      Eigen::MatrixXd h = Gram(jacobian_);
      // A tiny ridge keeps the solve defined when a direction is (nearly) unidentified, e.g. a
      // trend and a seasonal ramp on a short history.
      const double ridge = 1e-12 * std::max(h.diagonal().maxCoeff(), 1e-300);
      h.diagonal().array() += ridge;
      factor.compute(h);
      refresh = false;
    }
    // Gradient of n/2 log S (+ sum log mu) scaled by S/n, and the Gauss-Newton Hessian J'J on
    // the same scale.
    Eigen::VectorXd g = JacobianTimesResiduals();
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
    double f_new = f;
    double new_level = level, new_trend = trend;
    const double lambda = Backtrack(f, f_new, [&](double step) {
      move(delta, step, new_level, new_trend, trial_season_);
      ++*passes;
      return Objective(params, new_level, new_trend, trial_season_);
    });
    if (lambda == 0.0) break;
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
