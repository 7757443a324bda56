#pragma once
// Maximum-likelihood fitting of one exponential-smoothing form, and automatic selection by AICc
// over a candidate set.
//
// The objective is -loglik from model::EvaluateLikelihood (concentrated Gaussian likelihood),
// minimised over the smoothing parameters, phi and the initial states (level, trend, m-1
// seasonal states; the m-th follows from the normalisation). For trends N/A/Ad (the default
// candidates) in the usual region only the smoothing parameters are searched, by NLopt's L-BFGS
// on the exact gradient of the profile, and the best initial state for each of their values is
// solved for (Gauss-Newton, exact in one step for additive error with additive components;
// src/fit/state_solver.h); other forms and the admissible region search everything with BOBYQA
// (see src/fit/fit.cc for both choices). In the usual region the
// search runs on boxes: alpha, beta* = beta / alpha, gamma* = gamma / (1 - alpha) each in
// [1e-4, 1 - 1e-4] and phi in [0.8, 0.98], the bounds the reference library uses.
//
// Thread-safety: pure functions of their arguments; no globals, so distinct threads may fit at
// once. The caller's history is read in place (never copied) and must outlive the call.

#include <cstdint>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "plimsoll/base/clock.h"
#include "plimsoll/base/status.h"
#include "plimsoll/model/likelihood.h"
#include "plimsoll/model/params.h"
#include "plimsoll/model/spec.h"
#include "plimsoll/model/state.h"

namespace plimsoll::fit {

// How one smoothing parameter (alpha, beta, gamma, phi; state-space convention) is treated.
// Default: estimated over the region's full range. `fixed` pins it; `lower`/`upper` narrow the
// search (inclusive). A fixed value or range outside the region fails validation.
struct ParamControl {
  std::optional<double> fixed;
  std::optional<double> lower;
  std::optional<double> upper;
};

struct FitOptions {
  // Season length m of the history; 1 = no seasonal forms. Validated >= 1.
  int period = 1;
  // Candidate forms; empty = model::DefaultCandidates(period, positive data). Forms here are
  // still filtered by `error`, `allow_damped` and the data checks below (with reasons).
  std::vector<model::ModelSpec> forms;
  // Restricts the error type of the candidates; unset = both.
  std::optional<model::ErrorType> error;
  // False drops damped-trend forms from the candidates.
  bool allow_damped = true;
  // Parameter region: kUsual (boxes, default, fast and what practice uses) or kAdmissible
  // (forecastability, model::CheckParams; wider, alpha up to 2, slower and less smooth).
  model::ParamRegion region = model::ParamRegion::kUsual;
  ParamControl alpha, beta, gamma, phi;
  // Seasonal initial states are estimated only for m <= this; above it they stay at the
  // heuristic values (each one costs a dimension; the result says so). Validated >= 2.
  int max_estimated_season = 24;
  // Passes over the history allowed per form (likelihood evaluations and the initial-state
  // solve's sensitivity passes; see FitResult::evaluations), over all starts and restarts.
  // Trade-off: more is closer to the optimum on hard surfaces (a seasonal form searched in full
  // can take several thousand; with the state solved for, a few hundred to ~1500), fewer is
  // faster. Validated >= 10.
  int max_evaluations = 10000;
  // Wall time allowed per form in seconds (0 = no limit). A fit that hits it keeps its best
  // point and reports "time budget". Makes results depend on machine speed when it binds.
  double max_seconds_per_form = 0.0;
  // Optimiser starts per form, 1..6. All start at the heuristic state; the first with alpha 0.5,
  // beta* 0.1, gamma* 0.1, phi 0.97, the others with other smoothing values. Concentrated
  // search (default forms, usual region): each start runs to convergence (stopped early when it
  // reaches an earlier start's optimum), then short wide BOBYQA probes around the best point.
  // In SelectModel a multiplicative-error form with additive components starts instead from
  // its additive-error twin's optimum when that form was fitted earlier in the list (one start).
  // Full search: each start gets a short screening run and the full run continues from the best
  // point found; up to 3 restarts with fresh trust regions follow while they improve.
  // Trade-off: the likelihood surfaces are often multimodal (3 starts matched or beat the
  // reference library on all 42 reference fits), each start costs 10-30 evaluations.
  int starts = 3;
  // Convergence: relative change of -loglik below this ends a start. Validated in (0, 1e-2].
  double relative_tolerance = 1e-10;
  // AICc values within this absolute distance of the best are reported as ties.
  double tie_tolerance = 1e-6;
};

// Checks every field once: ranges, fixed values inside the region, period >= 1, forms valid for
// the period. Returns InvalidArgument naming the field.
Status ValidateOptions(const FitOptions& options);

// Why a fit stopped.
enum class StopReason : uint8_t {
  kConverged = 0,         // tolerance reached
  kEvaluationBudget = 1,  // max_evaluations used up
  kTimeBudget = 2,        // max_seconds_per_form used up
  kRoundoff = 3,          // optimiser could not progress further (best point kept)
};
// "converged", "evaluation budget", "time budget", "roundoff".
std::string_view StopReasonName(StopReason reason);

struct FitResult {
  model::ModelSpec spec;
  model::Params params;
  model::State initial_state;  // fitted initial state (sigma2 set to the fitted sigma2)
  model::State final_state;    // state after the last observation, sigma2 set: ready to forecast
  double loglik = 0.0;
  double sigma2 = 0.0;
  model::InformationCriteria criteria{};
  int k = 0;                   // parameters counted in the criteria (estimated ones + sigma2)
  int n = 0;                   // non-missing observations
  bool converged = false;
  StopReason stop = StopReason::kConverged;
  bool seasonal_states_estimated = true;  // false when m > max_estimated_season (heuristic kept)
  int evaluations = 0;         // passes over the history: likelihood evaluations, plus
                               // sensitivity passes of the initial-state solve
  double seconds = 0.0;        // wall time of this fit
};

// Fits one form by maximum likelihood. `clock` times the fit and enforces the time budget.
// Fails with InvalidArgument for bad options, a form that does not suit the data (non-positive
// values for a multiplicative form, too short a history for a seasonal form, n <= k + 1) with
// the reason; NumericFailure when no start point has a finite likelihood.
Result<FitResult> FitModel(const model::ModelSpec& spec, std::span<const double> y, const FitOptions& options,
                           const Clock& clock = *SystemClock());

enum class CandidateOutcome : uint8_t {
  kFitted = 0,
  kSkipped = 1,  // not attempted: the data rule it out (reason says which rule)
  kFailed = 2,   // attempted, no usable fit (reason says why)
};
std::string_view CandidateOutcomeName(CandidateOutcome outcome);  // "fitted", "skipped", "failed"

struct Candidate {
  model::ModelSpec spec;
  CandidateOutcome outcome = CandidateOutcome::kFitted;
  std::string reason;            // empty when fitted
  std::optional<FitResult> fit;  // set when fitted
};

struct Selection {
  // Fitted candidates ranked by AICc (ascending; ties broken by fewer parameters, then candidate
  // order), then failed ones, then skipped ones, each in candidate order.
  std::vector<Candidate> candidates;
  size_t chosen = 0;             // index into candidates (always a fitted one)
  std::vector<size_t> ties;      // other fitted candidates within tie_tolerance of the chosen AICc
  bool positive_data = false;    // every non-missing value > 0
  int n = 0;                     // non-missing observations
  double seconds = 0.0;

  const FitResult& best() const { return *candidates[chosen].fit; }
};

// Fits every candidate form and picks the smallest AICc. Skips multiplicative forms for data
// that are not strictly positive and seasonal forms for histories shorter than 2 periods,
// recording the reason. Deterministic for a given input unless a time budget binds.
// Fails with InvalidArgument for bad options, an empty/all-missing or non-finite history, or
// when no candidate could be fitted (the message lists each candidate's reason).
Result<Selection> SelectModel(std::span<const double> y, const FitOptions& options,
                              const Clock& clock = *SystemClock());

}  // namespace plimsoll::fit
