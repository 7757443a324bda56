#pragma once
// The ModelChooser the daemon uses: automatic selection (fit::SelectModel) over the profile's
// candidate forms (or the default candidates), restricted to additive forms when asked.
// Thread-safety: the returned function is stateless apart from its copy of `base`; it may be
// called from several threads at once.

#include "plimsoll/base/clock.h"
#include "plimsoll/fit/fit.h"
#include "plimsoll/stream/engine.h"

namespace plimsoll::stream {

// `base` supplies the estimation settings (budgets, region); period and forms come from the
// series' rules. REQUIRES: clock outlives the chooser.
ModelChooser MakeFitChooser(fit::FitOptions base, const Clock* clock = SystemClock());

}  // namespace plimsoll::stream
