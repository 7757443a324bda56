#pragma once
// A fixed ETS(A,N,N) model for tests whose chooser must not fit: the level starts at the first
// observed value of the history, so replays and restarts give the same state.

#include <cmath>
#include <span>

#include "plimsoll/stream/engine.h"

namespace plimsoll::stream::testing {

// ETS(A,N,N) with `alpha` and innovation variance `sigma2`; level = first non-NaN value (0 if none).
inline ModelChoice LevelChoice(std::span<const double> history, double alpha, double sigma2) {
  ModelChoice c;
  c.spec = model::ModelSpec{};  // ETS(A,N,N)
  c.params.alpha = alpha;
  for (double v : history)
    if (!std::isnan(v)) {
      c.initial.level = v;
      break;
    }
  c.initial.sigma2 = sigma2;
  return c;
}

}  // namespace plimsoll::stream::testing
