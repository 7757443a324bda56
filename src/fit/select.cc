// Option validation and automatic selection by AICc.
#include <algorithm>
#include <cmath>
#include <numeric>
#include <string>

#include "fit/fit_internal.h"
#include "plimsoll/fit/fit.h"

namespace plimsoll::fit {
namespace {

using model::ModelSpec;

constexpr int kMaxStarts = 6;

Status CheckControl(const char* name, const ParamControl& c, double lo, double hi, bool hi_inclusive) {
  const std::string n = name;
  auto inside = [&](double v) { return std::isfinite(v) && v > lo && (hi_inclusive ? v <= hi : v < hi); };
  const std::string region = "(" + FormatValue(lo) + ", " + FormatValue(hi) + (hi_inclusive ? "]" : ")");
  if (c.fixed && (c.lower || c.upper)) {
    return Status::InvalidArgument(n + ": give a fixed value or a range, not both");
  }
  if (c.fixed && !inside(*c.fixed)) {
    return Status::InvalidArgument(n + ": fixed value " + FormatValue(*c.fixed) + " is outside " + region);
  }
  if (c.lower && !(std::isfinite(*c.lower) && *c.lower >= lo && *c.lower < hi)) {
    return Status::InvalidArgument(n + ": lower bound " + FormatValue(*c.lower) + " is outside " + region);
  }
  if (c.upper && !(std::isfinite(*c.upper) && *c.upper > lo && *c.upper <= hi)) {
    return Status::InvalidArgument(n + ": upper bound " + FormatValue(*c.upper) + " is outside " + region);
  }
  if (c.lower && c.upper && *c.lower >= *c.upper) {
    return Status::InvalidArgument(n + ": lower bound " + FormatValue(*c.lower) + " is not below upper bound " +
                                   FormatValue(*c.upper));
  }
  return Status::Ok();
}

}  // namespace

Status ValidateOptions(const FitOptions& o) {
  if (o.period < 1) return Status::InvalidArgument("period: must be >= 1, got " + std::to_string(o.period));
  const bool admissible = o.region == model::ParamRegion::kAdmissible;
  // Per-parameter boxes of each region; joint constraints (beta < alpha, gamma < 1 - alpha, the
  // admissible eigenvalue condition) are enforced during the fit.
  PLIMSOLL_RETURN_IF_ERROR(CheckControl("alpha", o.alpha, 0.0, admissible ? 2.0 : 1.0, false));
  PLIMSOLL_RETURN_IF_ERROR(CheckControl("beta", o.beta, 0.0, admissible ? 4.0 : 1.0, false));
  PLIMSOLL_RETURN_IF_ERROR(CheckControl("gamma", o.gamma, 0.0, admissible ? 2.0 : 1.0, false));
  PLIMSOLL_RETURN_IF_ERROR(CheckControl("phi", o.phi, 0.0, 1.0, true));
  for (const ModelSpec& spec : o.forms) {
    if (spec.has_season() && spec.period != o.period) {
      return Status::InvalidArgument("forms: " + spec.Notation() + " has period " + std::to_string(spec.period) +
                                     " but the history's period is " + std::to_string(o.period));
    }
    if (!spec.has_season() && spec.period != 1) {
      return Status::InvalidArgument("forms: " + spec.Notation() + " has no season but period " +
                                     std::to_string(spec.period));
    }
  }
  if (o.max_estimated_season < 2) return Status::InvalidArgument("max_estimated_season: must be >= 2");
  if (o.max_evaluations < 10) return Status::InvalidArgument("max_evaluations: must be >= 10");
  if (!(o.max_seconds_per_form >= 0)) return Status::InvalidArgument("max_seconds_per_form: must be >= 0");
  if (o.starts < 1 || o.starts > kMaxStarts) {
    return Status::InvalidArgument("starts: must be in 1.." + std::to_string(kMaxStarts));
  }
  if (!(o.relative_tolerance > 0 && o.relative_tolerance <= 1e-2)) {
    return Status::InvalidArgument("relative_tolerance: must be in (0, 0.01]");
  }
  if (!(o.tie_tolerance >= 0)) return Status::InvalidArgument("tie_tolerance: must be >= 0");
  return Status::Ok();
}

std::string_view CandidateOutcomeName(CandidateOutcome outcome) {
  switch (outcome) {
    case CandidateOutcome::kFitted: return "fitted";
    case CandidateOutcome::kSkipped: return "skipped";
    case CandidateOutcome::kFailed: return "failed";
  }
  return "unknown";
}

Result<Selection> SelectModel(std::span<const double> y, const FitOptions& options, const Clock& clock) {
  const int64_t start_nanos = clock.MonotonicNanos();
  PLIMSOLL_RETURN_IF_ERROR(ValidateOptions(options));
  auto data = SummariseData(y);
  if (!data.ok()) return data.status();

  // Multiplicative forms stay in the list when the data are not positive, so the skip and its
  // reason are reported rather than silently absent.
  std::vector<ModelSpec> forms =
      options.forms.empty() ? model::DefaultCandidates(options.period, /*positive_data=*/true) : options.forms;
  std::erase_if(forms, [&](const ModelSpec& s) {
    return (options.error && s.error != *options.error) || (!options.allow_damped && s.damped());
  });
  if (forms.empty()) return Status::InvalidArgument("no candidate forms left after the error/damped restrictions");

  Selection sel;
  sel.positive_data = data->positive;
  sel.n = data->n;
  std::vector<Candidate> fitted, failed, skipped;
  for (const ModelSpec& spec : forms) {
    Candidate c;
    c.spec = spec;
    Status suits = CheckFormSuitsData(spec, y, *data, options);
    if (!suits.ok()) {
      c.outcome = CandidateOutcome::kSkipped;
      c.reason = suits.message();
      skipped.push_back(std::move(c));
      continue;
    }
    // A multiplicative-error form starts from its additive-error twin's optimum, a
    // multiplicative-season form from its additive-season twin's, when that was fitted earlier in
    // the list (the default candidates list every A error form first and A season before M).
    const FitResult* twin = nullptr;
    for (const Candidate& done : fitted) {
      if (IsErrorTwin(spec, done.spec) || IsSeasonTwin(spec, done.spec) || IsTrendTwin(spec, done.spec)) twin = &*done.fit;
    }
    auto fit = FitValidated(spec, y, *data, options, clock, twin);
    if (!fit.ok()) {
      c.outcome = CandidateOutcome::kFailed;
      c.reason = fit.status().message();
      failed.push_back(std::move(c));
      continue;
    }
    c.fit = std::move(fit).value();
    fitted.push_back(std::move(c));
  }
  if (fitted.empty()) {
    std::string why = "no candidate form could be fitted:";
    for (const auto* list : {&failed, &skipped}) {
      for (const Candidate& c : *list) why += " " + c.spec.Notation() + ": " + c.reason + ";";
    }
    why.pop_back();
    return Status::InvalidArgument(why);
  }
  // Stable sort keeps candidate order among equal keys, so the ranking is deterministic.
  std::stable_sort(fitted.begin(), fitted.end(), [](const Candidate& a, const Candidate& b) {
    const double ca = a.fit->criteria.aicc, cb = b.fit->criteria.aicc;
    if (ca != cb) return ca < cb;
    return a.fit->k < b.fit->k;
  });
  const double best = fitted.front().fit->criteria.aicc;
  for (size_t i = 1; i < fitted.size(); ++i) {
    if (std::fabs(fitted[i].fit->criteria.aicc - best) <= options.tie_tolerance) sel.ties.push_back(i);
  }
  sel.chosen = 0;
  sel.candidates = std::move(fitted);
  for (auto* list : {&failed, &skipped}) {
    for (Candidate& c : *list) sel.candidates.push_back(std::move(c));
  }
  sel.seconds = static_cast<double>(clock.MonotonicNanos() - start_nanos) * 1e-9;
  return sel;
}

}  // namespace plimsoll::fit
