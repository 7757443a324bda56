#pragma once
// The one-step recursion as a template over (error, trend, season), so each of the 30 forms
// compiles to straight-line code. Error-correction form of Hyndman, Koehler, Ord & Snyder (2008),
// ch. 2, Table 2.3, written with the absolute error e = y - mu, which makes the A- and M-error
// state updates identical. With lp = l_{t-1} (+) b_{t-1} (N: l; A: l + b; Ad: l + phi b;
// M: l b; Md: l b^phi) and s = s_{t-m}:
//   mu  = lp | lp + s | lp s                               (season N | A | M)
//   l_t = lp + alpha e~,            e~ = e / s for M season, else e
//   b_t = phi b + beta e~           (A, Ad; phi = 1 for A)
//   b_t = b^phi + beta e~ / l_{t-1} (M, Md; phi = 1 for M)
//   s_t = s + gamma e | s + gamma e / lp                  (season A | M)
// A NaN y is a gap: e = 0, i.e. the state advances by its prediction.
// The seasonal ring: season[head] is s_{t-m} for the next observation; it is overwritten with
// s_t and head advances (mod m), so a step touches one slot whatever m is.

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>
#include <utility>

#include "plimsoll/model/params.h"
#include "plimsoll/model/spec.h"
#include "plimsoll/model/state.h"
#include "plimsoll/model/update.h"

namespace plimsoll::model::internal {

template <ErrorType E, TrendType T, SeasonType S>
struct Kernel {
  static constexpr ErrorType kError = E;
  static constexpr TrendType kTrend = T;
  static constexpr SeasonType kSeason = S;
  static constexpr bool kMultTrend = T == TrendType::kMultiplicative || T == TrendType::kMultiplicativeDamped;
  static constexpr bool kNeedsPositive =
      E == ErrorType::kMultiplicative || S == SeasonType::kMultiplicative || kMultTrend;

  // What the next observation is judged against, and the pieces the correction reuses.
  struct Prediction {
    double lp;  // level-trend part of the forecast
    double bn;  // trend carried forward (phi b, or b^phi)
    double s;   // s_{t-m} (0 without season)
    double mu;  // one-step forecast
  };

  static inline Prediction Predict(const Params& p, const State& st) {
    Prediction q{st.level, 0.0, 0.0, 0.0};
    const double l = st.level;
    const double b = st.trend;
    if constexpr (T == TrendType::kAdditive) {
      q.bn = b;
      q.lp = l + b;
    } else if constexpr (T == TrendType::kAdditiveDamped) {
      q.bn = p.phi * b;
      q.lp = l + q.bn;
    } else if constexpr (T == TrendType::kMultiplicative) {
      q.bn = b;
      q.lp = l * b;
    } else if constexpr (T == TrendType::kMultiplicativeDamped) {
      q.bn = std::pow(b, p.phi);
      q.lp = l * q.bn;
    }
    if constexpr (S == SeasonType::kNone) {
      q.mu = q.lp;
    } else if constexpr (S == SeasonType::kAdditive) {
      q.s = st.season[st.head];
      q.mu = q.lp + q.s;
    } else {
      q.s = st.season[st.head];
      q.mu = q.lp * q.s;
    }
    return q;
  }

  // Applies the correction. `scaled` is e~ (the error in level units: e, or e / s with a
  // multiplicative season) and `e` the absolute error; both 0 for a gap step.
  static inline void Correct(const Params& p, State& st, const Prediction& q, double scaled, double e) {
    const double l_prev = st.level;
    st.level = q.lp + p.alpha * scaled;
    if constexpr (T == TrendType::kAdditive || T == TrendType::kAdditiveDamped) {
      st.trend = q.bn + p.beta * scaled;
    } else if constexpr (kMultTrend) {
      st.trend = q.bn + p.beta * scaled / l_prev;
    }
    if constexpr (S != SeasonType::kNone) {
      double* ring = st.season.data();
      const uint32_t h = st.head;
      if constexpr (S == SeasonType::kAdditive) {
        ring[h] = q.s + p.gamma * e;
      } else {
        ring[h] = q.s + p.gamma * e / q.lp;
      }
      const uint32_t next = h + 1;
      st.head = next == static_cast<uint32_t>(st.season.size()) ? 0u : next;
    }
    ++st.steps;
  }

  // Corrects the state predicted as `q` with observation y (NaN: gap step); returns e = y - mu.
  static inline double Observe(const Params& p, State& st, const Prediction& q, double y) {
    const double e = y - q.mu;
    if (std::isnan(y)) [[unlikely]] {
      Correct(p, st, q, 0.0, 0.0);
    } else {
      // e~ = y_deseasonalised - lp (equal to e, or e / s, up to rounding). y_deseasonalised
      // does not depend on the previous level, so the level's dependency chain from one step
      // to the next is one subtraction and one multiply-add long.
      double y_des = y;
      if constexpr (S == SeasonType::kAdditive) y_des = y - q.s;
      if constexpr (S == SeasonType::kMultiplicative) y_des = y * (1.0 / q.s);
      Correct(p, st, q, y_des - q.lp, e);
    }
    return e;
  }

  // The UpdateFn contract (update.h).
  static StepResult Step(const Params& p, State& st, double y) {
    const Prediction q = Predict(p, st);
    const double e = Observe(p, st, q, y);
    if constexpr (E == ErrorType::kAdditive) {
      return {q.mu, e, e};
    } else {
      return {q.mu, e, e / q.mu};
    }
  }

  // The BandedUpdateFn contract (update.h): one prediction serves the band, the flag and the
  // correction. The band arithmetic is OneStepBand's (forecast.cc), so the bounds are the same.
  static BandedStep StepBanded(const Params& p, State& st, double y, const BandRule& band) {
    const Prediction q = Predict(p, st);
    BandedStep r{};
    r.mu = q.mu;
    if (!std::isfinite(q.mu) || (kNeedsPositive && q.mu <= 0.0)) [[unlikely]]
      return r;  // valid = false: state untouched
    r.valid = true;
    if constexpr (E == ErrorType::kAdditive) {
      r.lower = q.mu - band.z * band.sd;
      r.upper = q.mu + band.z * band.sd;
    } else {
      const double a = q.mu * (1.0 - band.z * band.sd);
      const double b = q.mu * (1.0 + band.z * band.sd);
      r.lower = std::min(a, b);
      r.upper = std::max(a, b);
    }
    r.flagged = y < r.lower || y > r.upper;
    double y_state = y;
    if (r.flagged) [[unlikely]] {
      if (band.policy == BandPolicy::kClip) y_state = y < r.lower ? r.lower : r.upper;
      if (band.policy == BandPolicy::kSkip) y_state = std::numeric_limits<double>::quiet_NaN();
    }
    Observe(p, st, q, y_state);
    return r;
  }

  // Simulation step driven by innovation eps (absolute for A error, relative for M error);
  // returns the simulated observation.
  static inline double Simulate(const Params& p, State& st, double eps) {
    const Prediction q = Predict(p, st);
    double e = eps;
    if constexpr (E == ErrorType::kMultiplicative) e = q.mu * eps;
    double scaled = e;
    if constexpr (S == SeasonType::kMultiplicative) scaled = e / q.s;
    Correct(p, st, q, scaled, e);
    return q.mu + e;
  }
};

// Calls fn(Kernel<E, T, S>{}) for the spec's form; one switch per call, none per step.
template <typename Fn>
decltype(auto) DispatchForm(const ModelSpec& spec, Fn&& fn) {
  auto by_season = [&]<ErrorType E, TrendType T>() -> decltype(auto) {
    switch (spec.season) {
      case SeasonType::kAdditive: return fn(Kernel<E, T, SeasonType::kAdditive>{});
      case SeasonType::kMultiplicative: return fn(Kernel<E, T, SeasonType::kMultiplicative>{});
      case SeasonType::kNone: break;
    }
    return fn(Kernel<E, T, SeasonType::kNone>{});
  };
  auto by_trend = [&]<ErrorType E>() -> decltype(auto) {
    switch (spec.trend) {
      case TrendType::kAdditive: return by_season.template operator()<E, TrendType::kAdditive>();
      case TrendType::kAdditiveDamped: return by_season.template operator()<E, TrendType::kAdditiveDamped>();
      case TrendType::kMultiplicative: return by_season.template operator()<E, TrendType::kMultiplicative>();
      case TrendType::kMultiplicativeDamped:
        return by_season.template operator()<E, TrendType::kMultiplicativeDamped>();
      case TrendType::kNone: break;
    }
    return by_season.template operator()<E, TrendType::kNone>();
  };
  if (spec.error == ErrorType::kMultiplicative) return by_trend.template operator()<ErrorType::kMultiplicative>();
  return by_trend.template operator()<ErrorType::kAdditive>();
}

}  // namespace plimsoll::model::internal
