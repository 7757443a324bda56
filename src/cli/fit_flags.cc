#include "cli/fit_flags.h"

#include <cmath>
#include <cstdio>

#include "plimsoll/fit/option_text.h"

namespace plimsoll::cli {

void AddFitFlags(CLI::App& verb, FitFlags& f) {
  verb.add_option("FILE", f.file, "series file: one value a line, or time,value; a header line is allowed")
      ->required();
  verb.add_option("--period", f.period, "season length in steps (1 = no season)")->check(CLI::PositiveNumber);
  verb.add_option("--forms", f.forms, "candidate forms, e.g. \"ETS(A,Ad,A),ETS(M,N,M)\", or auto");
  verb.add_option("--region", f.region, "parameter region: usual or admissible")
      ->check(CLI::IsMember({"usual", "admissible"}));
  verb.add_option("--error", f.error, "only this error type: A or M")->check(CLI::IsMember({"A", "M"}));
  verb.add_flag("--no-damped", f.no_damped, "leave out damped-trend forms");
  verb.add_option("--alpha", f.alpha, "fix alpha (0.3) or bound it (0.1:0.5)");
  verb.add_option("--beta", f.beta, "fix or bound beta (state-space convention, beta < alpha)");
  verb.add_option("--gamma", f.gamma, "fix or bound gamma (state-space convention, gamma < 1 - alpha)");
  verb.add_option("--phi", f.phi, "fix or bound the damping factor phi (default range 0.8:0.98)");
  verb.add_option("--starts", f.starts, "optimiser starts per form (1-6)");
  verb.add_option("--max-evals", f.max_evaluations, "passes over the history allowed per form (likelihood and state-solve passes)");
}

Result<FitInput> LoadFitInput(const FitFlags& f) {
  FitInput in;
  auto series = fit::ReadSeriesFile(f.file);
  if (!series.ok()) return series.status();
  in.series = std::move(series).value();
  fit::FitOptions& o = in.options;
  o.period = f.period;
  auto forms = fit::ParseFormList(f.forms, f.period);
  if (!forms.ok()) return forms.status();
  o.forms = std::move(forms).value();
  in.forms_forced = !o.forms.empty();
  o.region = f.region == "admissible" ? model::ParamRegion::kAdmissible : model::ParamRegion::kUsual;
  if (f.error == "A") o.error = model::ErrorType::kAdditive;
  if (f.error == "M") o.error = model::ErrorType::kMultiplicative;
  o.allow_damped = !f.no_damped;
  const std::pair<const std::string*, fit::ParamControl*> controls[] = {
      {&f.alpha, &o.alpha}, {&f.beta, &o.beta}, {&f.gamma, &o.gamma}, {&f.phi, &o.phi}};
  const char* names[] = {"--alpha", "--beta", "--gamma", "--phi"};
  for (size_t i = 0; i < 4; ++i) {
    if (controls[i].first->empty()) continue;
    auto c = fit::ParseParamControl(*controls[i].first, names[i]);
    if (!c.ok()) return c.status();
    *controls[i].second = *c;
  }
  o.starts = f.starts;
  o.max_evaluations = f.max_evaluations;
  PLIMSOLL_RETURN_IF_ERROR(fit::ValidateOptions(o));

  if (in.forms_forced) {
    for (const model::ModelSpec& spec : o.forms) {
      if (!spec.needs_positive_data()) continue;
      for (size_t i = 0; i < in.series.values.size(); ++i) {
        const double v = in.series.values[i];
        if (!std::isnan(v) && v <= 0) {
          return Status::InvalidArgument(f.file + " line " + std::to_string(in.series.lines[i]) + ": value " +
                                         Num(v) + " is not positive, and " + spec.Notation() +
                                         " needs strictly positive data");
        }
      }
    }
  }
  return in;
}

Result<fit::Selection> SelectForInput(const FitInput& input, const std::string& file) {
  auto sel = fit::SelectModel(input.series.values, input.options);
  if (!sel.ok()) return sel.status().WithContext(file);
  return sel;
}

std::string Num(double v, int digits) {
  char buf[48];
  std::snprintf(buf, sizeof(buf), "%.*g", digits, v);
  return buf;
}

}  // namespace plimsoll::cli
