// `plimsoll outlook FILE`: fits (or takes --form), then prints the forecast with intervals.
#include <iostream>
#include <memory>
#include <sstream>
#include <string>
#include <vector>

#include "cli/commands.h"
#include "cli/fit_flags.h"
#include "plimsoll/base/json_writer.h"
#include "plimsoll/fit/fit.h"
#include "plimsoll/fit/option_text.h"
#include "plimsoll/model/forecast.h"

namespace plimsoll::cli {
namespace {

struct OutlookFlags {
  FitFlags fit;
  std::string form;  // one form: skips selection
  int horizon = 24;
  std::string levels = "80,95";
  std::string format = "table";
  int paths = model::ForecastOptions{}.paths;
  uint64_t seed = model::ForecastOptions{}.seed;
};

Result<std::vector<double>> ParseLevels(const std::string& text) {
  std::vector<double> out;
  std::stringstream in(text);
  std::string item;
  while (std::getline(in, item, ',')) {
    size_t used = 0;
    double v = 0;
    try {
      v = std::stod(item, &used);
    } catch (const std::exception&) {
      used = 0;
    }
    if (used == 0 || used != item.size() || !(v > 0 && v < 100)) {
      return Status::InvalidArgument("--levels: '" + item + "' is not a percentage in (0, 100)");
    }
    out.push_back(v);
  }
  if (out.empty()) return Status::InvalidArgument("--levels: no levels given");
  return out;
}

std::string LevelLabel(double level) { return Num(level, 6); }

int RunOutlook(OutlookFlags& f) {
  if (!f.form.empty()) f.fit.forms = f.form;
  auto input = LoadFitInput(f.fit);
  if (!input.ok()) {
    std::cerr << "plimsoll outlook: " << input.status().message() << "\n";
    return 1;
  }
  auto levels = ParseLevels(f.levels);
  if (!levels.ok()) {
    std::cerr << "plimsoll outlook: " << levels.status().message() << "\n";
    return 1;
  }
  auto sel = SelectForInput(*input, f.fit.file);
  if (!sel.ok()) {
    std::cerr << "plimsoll outlook: " << sel.status().message() << "\n";
    return 1;
  }
  const fit::FitResult& best = sel->best();
  model::ForecastOptions fo;
  fo.horizon = f.horizon;
  fo.levels = *levels;
  fo.paths = f.paths;
  fo.seed = f.seed;
  auto fc = model::Forecast(best.spec, best.params, best.final_state, fo);
  if (!fc.ok()) {
    std::cerr << "plimsoll outlook: " << fc.status().ToString() << "\n";
    return 1;
  }
  const char* method = fc->method == model::VarianceMethod::kAnalytic ? "analytic" : "simulated";
  const size_t fitted = static_cast<size_t>(std::count_if(
      sel->candidates.begin(), sel->candidates.end(), [](const fit::Candidate& c) { return c.fit.has_value(); }));

  if (f.format == "json") {
    JsonWriter w;
    w.BeginObject().Field("form", best.spec.Notation());
    w.Field("chosen_by", fitted > 1 ? "aicc" : "single form");
    w.Field("loglik", best.loglik).Field("aicc", best.criteria.aicc).Field("sigma2", best.sigma2);
    w.Field("variance_method", method).Field("observations", sel->n);
    w.Key("steps").BeginArray();
    for (const model::ForecastStep& s : fc->steps) {
      w.BeginObject().Field("ahead", s.h).Field("expected", s.mean).Field("variance", s.variance);
      w.Key("bands").BeginArray();
      for (const model::Interval& i : s.intervals) {
        w.BeginObject().Field("level", i.level).Field("low", i.lower).Field("high", i.upper).EndObject();
      }
      w.EndArray().EndObject();
    }
    w.EndArray().EndObject();
    std::cout << w.str() << "\n";
    return 0;
  }

  std::vector<std::string> header = {"ahead", "expected"};
  for (double l : *levels) {
    header.push_back("low_" + LevelLabel(l));
    header.push_back("high_" + LevelLabel(l));
  }
  std::vector<std::vector<std::string>> rows;
  for (const model::ForecastStep& s : fc->steps) {
    std::vector<std::string> row = {std::to_string(s.h), Num(s.mean, 8)};
    for (const model::Interval& i : s.intervals) {
      row.push_back(Num(i.lower, 8));
      row.push_back(Num(i.upper, 8));
    }
    rows.push_back(std::move(row));
  }
  if (f.format == "csv") {
    for (size_t i = 0; i < header.size(); ++i) std::cout << (i ? "," : "") << header[i];
    std::cout << "\n";
    for (const auto& r : rows) {
      for (size_t i = 0; i < r.size(); ++i) std::cout << (i ? "," : "") << r[i];
      std::cout << "\n";
    }
    return 0;
  }
  std::cout << "series " << f.fit.file << ": " << sel->n << " observations; model " << best.spec.Notation()
            << (fitted > 1 ? " (lowest aicc of " + std::to_string(fitted) + " fitted forms)" : std::string())
            << "; intervals " << method << "\n\n";
  std::vector<size_t> width(header.size());
  for (size_t i = 0; i < header.size(); ++i) width[i] = header[i].size();
  for (const auto& r : rows)
    for (size_t i = 0; i < r.size(); ++i) width[i] = std::max(width[i], r[i].size());
  auto print = [&](const std::vector<std::string>& r) {
    for (size_t i = 0; i < r.size(); ++i) std::cout << (i ? "  " : "") << std::string(width[i] - r[i].size(), ' ') << r[i];
    std::cout << "\n";
  };
  print(header);
  for (const auto& r : rows) print(r);
  return 0;
}

void AddOutlookVerb(CLI::App& app, CommandContext& context) {
  auto flags = std::make_shared<OutlookFlags>();
  CLI::App* verb = app.add_subcommand("outlook", "forecast a series file with prediction intervals");
  AddFitFlags(*verb, flags->fit);
  verb->add_option("--form", flags->form, "use this form (e.g. ETS(A,Ad,A)) instead of choosing by AICc");
  verb->add_option("--horizon", flags->horizon, "steps ahead to forecast")->check(CLI::PositiveNumber);
  verb->add_option("--levels", flags->levels, "interval levels in percent, comma-separated");
  verb->add_option("--format", flags->format, "table, csv or json")->check(CLI::IsMember({"table", "csv", "json"}));
  verb->add_option("--paths", flags->paths, "sample paths for forms without analytic variances")
      ->check(CLI::PositiveNumber);
  verb->add_option("--seed", flags->seed, "seed for simulated intervals");
  verb->callback([flags, &context] { context.exit_code = RunOutlook(*flags); });
}

PLIMSOLL_REGISTER_VERB(AddOutlookVerb);

}  // namespace
}  // namespace plimsoll::cli
