#pragma once
// Pieces shared by fit.cc and select.cc (internal to the fit module).

#include <cstddef>
#include <span>
#include <string>

#include "plimsoll/base/clock.h"
#include "plimsoll/base/status.h"
#include "plimsoll/fit/fit.h"
#include "plimsoll/model/spec.h"

namespace plimsoll::fit {

// What one pass over the history learns.
struct DataSummary {
  int n = 0;                      // non-missing observations
  bool positive = true;           // every non-missing value > 0
  size_t first_non_positive = 0;  // index of the first value <= 0 when !positive
};

// Fails with InvalidArgument for an infinite value (naming its index) or no observations.
Result<DataSummary> SummariseData(std::span<const double> y);

// Parameters counted in the information criteria for `spec` under `options` (fixed smoothing
// parameters and unestimated seasonal states excluded; sigma^2 included).
int CountEstimated(const model::ModelSpec& spec, const FitOptions& options);

// OK when `spec` can be fitted to this history; otherwise InvalidArgument with the reason
// (positive data, two full periods, more observations than parameters + 1).
Status CheckFormSuitsData(const model::ModelSpec& spec, std::span<const double> y, const DataSummary& data,
                          const FitOptions& options);

// FitModel after options and data have been checked once. `twin`, when set, is the fitted
// additive-error form with the same trend and season as a multiplicative-error `spec` (same state
// updates, likelihoods that differ only in the error scale), or the additive-season form with the
// same error and trend as a multiplicative-season `spec`: its optimum replaces the generic start
// points of the concentrated search (one start instead of `options.starts`; the probe still runs).
Result<FitResult> FitValidated(const model::ModelSpec& spec, std::span<const double> y, const DataSummary& data,
                               const FitOptions& options, const Clock& clock, const FitResult* twin = nullptr);

// True when `twin` may seed the search for `spec` (see FitValidated).
bool IsErrorTwin(const model::ModelSpec& spec, const model::ModelSpec& twin);
// True when `twin` is the additive-season form with the same error and trend as a
// multiplicative-season `spec`: its optimum, seasonal states turned into factors, seeds the
// search the same way (nearby optimum on data a multiplicative season suits).
bool IsSeasonTwin(const model::ModelSpec& spec, const model::ModelSpec& twin);
// True when `twin` is the additive-trend form with the same additive error and season as a
// damped `spec`: its optimum with phi at the top of the usual range (nearly undamped) seeds the
// search the same way.
bool IsTrendTwin(const model::ModelSpec& spec, const model::ModelSpec& twin);

// "%.6g" of v, for messages.
std::string FormatValue(double v);

}  // namespace plimsoll::fit
