#pragma once
// Heuristic initial states: where maximum likelihood starts, and the seasonal states it keeps
// for long periods.
//
// Seasonal forms (classical decomposition over the first K = min(3, n / m) full periods, K >= 2;
// Hyndman, Koehler, Snyder & Grose 2002, IJF 18(3), section 2.6; 2008 book, ch. 2):
//   1. a centred 2 x m moving average (plain m-term average for odd m) over those K m values;
//   2. detrend: y - MA (additive season) or y / MA (multiplicative season);
//   3. average the detrended values by position in the season;
//   4. normalise: sum 0 (additive) or mean 1 (multiplicative).
// Level and slope: a least-squares line through the seasonally adjusted values of the same
// K m observations (the first 10 observations for non-seasonal forms): level = intercept at
// t = 0, slope = additive trend, 1 + slope / intercept = multiplicative trend (growth ratio).
// Without a trend the level is the mean of those adjusted values.
//
// Thread-safety: pure functions.

#include <span>

#include "plimsoll/base/status.h"
#include "plimsoll/model/spec.h"
#include "plimsoll/model/state.h"

namespace plimsoll::fit {

// Seasonal forms need this many full periods of history.
inline constexpr int kMinSeasonalPeriods = 2;

// Returns the heuristic initial state for `spec` from history `y` (NaN = missing; missing values
// are skipped in averages and regressions). State::sigma2 is left 0; the state's seasonal ring is
// built with model::MakeState (chronological order, first value for y[0]).
// Fails with InvalidArgument when a seasonal form has fewer than 2 full periods, when fewer than
// 2 observations are available for the level/slope line, or when a form that needs positive
// data meets a non-positive or non-finite value in the window used.
Result<model::State> HeuristicState(const model::ModelSpec& spec, std::span<const double> y);

}  // namespace plimsoll::fit
