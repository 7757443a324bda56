#include "plimsoll/stream/fit_chooser.h"

#include <string>

namespace plimsoll::stream {

ModelChooser MakeFitChooser(fit::FitOptions base, const Clock* clock) {
  return [base = std::move(base), clock](std::span<const double> history, const SeriesRules& rules,
                                         bool additive_only) -> Result<ModelChoice> {
    fit::FitOptions options = base;
    options.period = rules.period;
    options.forms = rules.forms;
    if (additive_only) {
      // A non-positive value reached a multiplicative form: only fully additive forms qualify.
      std::vector<model::ModelSpec> forms = options.forms.empty()
                                                ? model::DefaultCandidates(rules.period, /*positive_data=*/false)
                                                : options.forms;
      std::erase_if(forms, [](const model::ModelSpec& f) { return f.needs_positive_data(); });
      if (forms.empty()) return Status::InvalidArgument("no additive form among the profile's forms");
      options.forms = std::move(forms);
    }
    Result<fit::Selection> selection = fit::SelectModel(history, options, *clock);
    if (!selection.ok()) return selection.status();
    const fit::FitResult& best = selection->best();
    ModelChoice choice;
    choice.spec = best.spec;
    choice.params = best.params;
    choice.initial = best.initial_state;
    // The maximum-likelihood sigma2 (SSE/n) is biased low by the k estimated parameters; over a
    // short warm-up with many seasonal states that makes the band too narrow and flags far more
    // than its level says. The band and intervals use the unbiased SSE/(n - k).
    // Seasonal states kept from the heuristic were estimated from the same data too.
    const int k = best.k + (best.seasonal_states_estimated ? 0 : best.spec.period - 1);
    if (best.n > k + 1)
      choice.initial.sigma2 = best.sigma2 * static_cast<double>(best.n) / static_cast<double>(best.n - k);
    choice.loglik = best.loglik;
    choice.aicc = best.criteria.aicc;
    if (!best.seasonal_states_estimated) choice.note = "seasonal initial states kept from the heuristic";
    if (!best.converged) {
      if (!choice.note.empty()) choice.note += "; ";
      choice.note += "optimiser stopped: " + std::string(fit::StopReasonName(best.stop));
    }
    return choice;
  };
}

}  // namespace plimsoll::stream
