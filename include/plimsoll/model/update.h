#pragma once
// One-step update of the single-source-of-error recursion.
//
// With the same parameters, A- and M-error forms give identical state updates and point
// forecasts when written with e_t = y_t - mu_t (2008 book, ch. 2); the error type only changes
// the likelihood and the forecast distribution. So there is one kernel per (trend, season)
// shape (15 of them), a template in src/model/, selected once per series (instantiated per error
// type too, only so the kernel can return the innovation in the form's own units).
//
// Thread-safety: pure functions over caller-owned values.

#include <cstdint>

#include "plimsoll/model/params.h"
#include "plimsoll/model/spec.h"
#include "plimsoll/model/state.h"

namespace plimsoll::model {

struct StepResult {
  double mu;          // one-step forecast made before seeing y
  double error;       // y - mu (NaN for a gap step)
  double innovation;  // error (A error) or error / mu (M error)
};

// Advances `state` by one observation y and returns the forecast it was judged against.
// A NaN y is a gap: the state advances by the prediction alone (error = innovation = NaN).
// Non-finite or (for M error / M season / M trend forms) non-positive mu is reported by the
// caller checking StepResult; the kernel itself never throws.
StepResult Update(const ModelSpec& spec, const Params& params, State& state, double y);

// The kernel for one form, to call without re-dispatching per observation; same contract as
// Update. Never null for a valid spec.
using UpdateFn = StepResult (*)(const Params& params, State& state, double y);
UpdateFn SelectUpdate(const ModelSpec& spec);

// How a live step judges an observation: band half-width z standard deviations, sd the innovation
// standard deviation (sqrt(sigma2), relative for M error), and what a flagged value feeds the state.
enum class BandPolicy : uint8_t {
  kUpdate = 0,  // the observed value
  kClip = 1,    // the nearer band edge
  kSkip = 2,    // nothing (a gap step)
};
struct BandRule {
  double z = 0.0;
  double sd = 0.0;
  BandPolicy policy = BandPolicy::kUpdate;
};

struct BandedStep {
  bool valid;     // false: mu non-finite, or <= 0 for a form that needs positive data; state untouched
  bool flagged;   // y outside [lower, upper]
  double mu;      // one-step forecast (PointForecast(spec, params, state, 1), bit for bit)
  double lower;   // OneStepBand(spec, mu, sd * sd, z), bit for bit when sd = sqrt(sigma2)
  double upper;
};

// The streaming engine's step: forecast, one-step band, flag, then the update with y (or what the
// policy makes of a flagged y), predicting once. Same arithmetic as PointForecast + OneStepBand +
// UpdateFn, so results are bit-identical to that sequence. Never null for a valid spec.
// REQUIRES: y finite.
using BandedUpdateFn = BandedStep (*)(const Params& params, State& state, double y, const BandRule& band);
BandedUpdateFn SelectBandedUpdate(const ModelSpec& spec);

// Point forecast h steps ahead from `state` (h >= 1), for every form.
double PointForecast(const ModelSpec& spec, const Params& params, const State& state, int h);

}  // namespace plimsoll::model
