#pragma once
// Simulation of series from a model: the published state space equations driven by Gaussian
// innovations (additive: y = mu + e; multiplicative: y = mu (1 + e)), e ~ N(0, sigma2).
// Used by interval simulation, tests (coverage, parameter recovery) and the demo.
//
// Thread-safety: pure functions; each call owns its generator.

#include <cstdint>
#include <span>
#include <vector>

#include "plimsoll/model/params.h"
#include "plimsoll/model/spec.h"
#include "plimsoll/model/state.h"

namespace plimsoll::model {

// n observations from `initial` with innovations drawn from N(0, sigma2), generator seeded
// with `seed` (std::mt19937_64; same seed, same series on every platform we build for).
std::vector<double> SimulateSeries(const ModelSpec& spec, const Params& params, const State& initial,
                                   double sigma2, int n, uint64_t seed);

// The same recursion with caller-supplied innovations (used as given, not scaled): one
// observation per entry of `innovations`.
std::vector<double> SimulateWithErrors(const ModelSpec& spec, const Params& params, const State& initial,
                                       std::span<const double> innovations);

}  // namespace plimsoll::model
