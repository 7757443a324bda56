// `plimsoll fit FILE`: fits every candidate form to a series file and prints them ranked by AICc.
#include <iostream>
#include <memory>
#include <sstream>
#include <string>
#include <vector>

#include "cli/commands.h"
#include "cli/fit_flags.h"
#include "plimsoll/base/json_writer.h"
#include "plimsoll/fit/fit.h"

namespace plimsoll::cli {
namespace {

void WriteParams(JsonWriter& w, const fit::FitResult& r) {
  w.Key("params").BeginObject().Field("alpha", r.params.alpha);
  if (r.spec.has_trend()) w.Field("beta", r.params.beta);
  if (r.spec.has_season()) w.Field("gamma", r.params.gamma);
  if (r.spec.damped()) w.Field("phi", r.params.phi);
  w.EndObject();
}

std::string SelectionJson(const fit::Selection& sel, const FitInput& in) {
  JsonWriter w;
  const fit::FitResult& best = sel.best();
  w.BeginObject();
  w.Key("chosen").BeginObject().Field("form", best.spec.Notation()).Field("loglik", best.loglik);
  w.Field("aicc", best.criteria.aicc);
  WriteParams(w, best);
  w.Field("sigma2", best.sigma2).EndObject();
  w.Key("ties").BeginArray();
  for (size_t i : sel.ties) w.String(sel.candidates[i].spec.Notation());
  w.EndArray();
  w.Field("observations", sel.n).Field("missing", static_cast<int64_t>(in.series.values.size()) - sel.n);
  w.Field("period", in.options.period).Field("positive_data", sel.positive_data);
  w.Field("region", in.options.region == model::ParamRegion::kUsual ? "usual" : "admissible");
  w.Field("seconds", sel.seconds);
  w.Key("candidates").BeginArray();
  for (const fit::Candidate& c : sel.candidates) {
    w.BeginObject().Field("form", c.spec.Notation()).Field("outcome", fit::CandidateOutcomeName(c.outcome));
    if (!c.fit) {
      w.Field("reason", c.reason).EndObject();
      continue;
    }
    const fit::FitResult& r = *c.fit;
    w.Field("loglik", r.loglik).Field("aic", r.criteria.aic).Field("aicc", r.criteria.aicc);
    w.Field("bic", r.criteria.bic).Field("k", r.k);
    WriteParams(w, r);
    w.Field("sigma2", r.sigma2).Field("converged", r.converged).Field("stop", fit::StopReasonName(r.stop));
    w.Field("evaluations", r.evaluations).Field("seconds", r.seconds);
    w.Field("seasonal_states_estimated", r.seasonal_states_estimated);
    w.Key("initial_state").BeginObject().Field("level", r.initial_state.level);
    if (r.spec.has_trend()) w.Field("trend", r.initial_state.trend);
    if (r.spec.has_season()) {
      w.Key("season").BeginArray();
      for (double s : model::SeasonChronological(r.initial_state)) w.Number(s);
      w.EndArray();
    }
    w.EndObject().EndObject();
  }
  w.EndArray().EndObject();
  return w.Take();
}

// Pads or right-aligns cells into columns.
class Table {
 public:
  explicit Table(std::vector<std::string> header) { rows_.push_back(std::move(header)); }
  void Add(std::vector<std::string> row) { rows_.push_back(std::move(row)); }
  void Print(std::ostream& out) const {
    std::vector<size_t> width(rows_[0].size(), 0);
    for (const auto& r : rows_)
      for (size_t i = 0; i < r.size(); ++i) width[i] = std::max(width[i], r[i].size());
    for (const auto& r : rows_) {
      for (size_t i = 0; i < r.size(); ++i) {
        if (i) out << "  ";
        const std::string pad(width[i] - r[i].size(), ' ');
        out << (i <= 1 ? r[i] + pad : pad + r[i]);  // rank and form left-aligned
      }
      out << "\n";
    }
  }

 private:
  std::vector<std::vector<std::string>> rows_;
};

void PrintSelection(const fit::Selection& sel, const FitInput& in, const std::string& file, std::ostream& out) {
  out << "series " << file << ": " << sel.n << " observations";
  const size_t missing = in.series.values.size() - static_cast<size_t>(sel.n);
  if (missing) out << " (" << missing << " missing)";
  out << ", period " << in.options.period << ", "
      << (in.options.region == model::ParamRegion::kUsual ? "usual" : "admissible") << " region\n\n";
  Table t({"rank", "form", "loglik", "aic", "aicc", "d_aicc", "bic", "k", "alpha", "beta", "gamma", "phi", "sigma2",
           "evals", "ms", "result"});
  const double best = sel.best().criteria.aicc;
  int rank = 0;
  for (const fit::Candidate& c : sel.candidates) {
    if (!c.fit) continue;
    const fit::FitResult& r = *c.fit;
    auto opt = [](bool has, double v) { return has ? Num(v, 4) : std::string("-"); };
    std::string result(fit::StopReasonName(r.stop));
    if (!r.seasonal_states_estimated) result += ", heuristic season";
    t.Add({std::to_string(++rank), c.spec.Notation(), Num(r.loglik, 8), Num(r.criteria.aic, 8),
           Num(r.criteria.aicc, 8), Num(r.criteria.aicc - best, 4), Num(r.criteria.bic, 8), std::to_string(r.k),
           Num(r.params.alpha, 4), opt(r.spec.has_trend(), r.params.beta), opt(r.spec.has_season(), r.params.gamma),
           opt(r.spec.damped(), r.params.phi), Num(r.sigma2, 5), std::to_string(r.evaluations),
           Num(r.seconds * 1e3, 3), result});
  }
  t.Print(out);
  for (const fit::Candidate& c : sel.candidates) {
    if (c.fit) continue;
    out << fit::CandidateOutcomeName(c.outcome) << " " << c.spec.Notation() << ": " << c.reason << "\n";
  }
  const fit::FitResult& b = sel.best();
  out << "\nchosen: " << b.spec.Notation() << "  aicc " << Num(b.criteria.aicc, 8) << "  alpha "
      << Num(b.params.alpha, 6);
  if (b.spec.has_trend()) out << "  beta " << Num(b.params.beta, 6);
  if (b.spec.has_season()) out << "  gamma " << Num(b.params.gamma, 6);
  if (b.spec.damped()) out << "  phi " << Num(b.params.phi, 6);
  out << "  sigma2 " << Num(b.sigma2, 6) << "\n";
  if (!sel.ties.empty()) {
    out << "tied on aicc with:";
    for (size_t i : sel.ties) out << " " << sel.candidates[i].spec.Notation();
    out << " (kept the one with fewer parameters, then the earlier candidate)\n";
  }
  if (!b.seasonal_states_estimated) {
    out << "note: period " << b.spec.period << " > " << in.options.max_estimated_season
        << ": seasonal initial states kept at their heuristic values, not estimated\n";
  }
  if (!b.converged) out << "note: the chosen fit stopped on " << fit::StopReasonName(b.stop) << "\n";
}

int RunFit(const FitFlags& flags, bool json) {
  auto input = LoadFitInput(flags);
  if (!input.ok()) {
    std::cerr << "plimsoll fit: " << input.status().message() << "\n";
    return 1;
  }
  auto sel = SelectForInput(*input, flags.file);
  if (!sel.ok()) {
    std::cerr << "plimsoll fit: " << sel.status().message() << "\n";
    return 1;
  }
  if (json) {
    std::cout << SelectionJson(*sel, *input) << "\n";
  } else {
    PrintSelection(*sel, *input, flags.file, std::cout);
  }
  return 0;
}

void AddFitVerb(CLI::App& app, CommandContext& context) {
  auto flags = std::make_shared<FitFlags>();
  auto json = std::make_shared<bool>(false);
  CLI::App* verb = app.add_subcommand(
      "fit", "fit exponential-smoothing forms to a series file and rank them by AICc");
  AddFitFlags(*verb, *flags);
  verb->add_flag("--json", *json, "print one JSON object instead of the table");
  verb->callback([flags, json, &context] { context.exit_code = RunFit(*flags, *json); });
}

PLIMSOLL_REGISTER_VERB(AddFitVerb);

}  // namespace
}  // namespace plimsoll::cli
