#include <catch2/catch.hpp>

#include <cmath>
#include <limits>
#include <string>
#include <thread>
#include <vector>

#include "plimsoll/base/clock.h"
#include "plimsoll/fit/fit.h"
#include "plimsoll/fit/initial.h"
#include "plimsoll/model/simulate.h"
#include "plimsoll/model/spec.h"

namespace plimsoll::fit {
namespace {

using model::ErrorType;
using model::ModelSpec;
using model::Params;
using model::SeasonType;
using model::TrendType;

ModelSpec Form(const char* text, int m) {
  auto spec = model::ParseModelSpec(text, m);
  REQUIRE(spec.ok());
  return *spec;
}

// A seasonal series from ETS(A,A,A) with m = 12: level 200, slope 0.5, sinusoidal season.
std::vector<double> SeasonalSeries(int n, uint64_t seed, ErrorType error = ErrorType::kAdditive) {
  const ModelSpec spec{error, TrendType::kAdditive, SeasonType::kAdditive, 12};
  std::vector<double> season;
  for (int j = 0; j < 12; ++j) season.push_back(20 * std::sin(2 * 3.14159265358979 * j / 12));
  const Params p{0.3, 0.03, 0.1, 1.0};
  const double s2 = error == ErrorType::kAdditive ? 9.0 : 0.0004;
  return model::SimulateSeries(spec, p, model::MakeState(200, 0.5, season), s2, n, seed);
}

// A clock that moves 1 ms each time it is read, to exercise the time budget deterministically.
class SteppingClock final : public Clock {
 public:
  int64_t MonotonicNanos() const override { return now_ += 1'000'000; }
  int64_t WallMillis() const override { return now_ / 1'000'000; }

 private:
  mutable int64_t now_ = 0;
};

TEST_CASE("fitted parameters stay in the usual region", "[fit]") {
  const auto y = SeasonalSeries(240, 7);
  FitOptions o;
  o.period = 12;
  for (const char* form : {"ETS(A,A,A)", "ETS(A,Ad,A)", "ETS(M,Ad,M)", "ETS(A,Ad,N)"}) {
    auto fit = FitModel(Form(form, 12), y, o);
    REQUIRE(fit.ok());
    const Params& p = fit->params;
    INFO(form << " alpha " << p.alpha << " beta " << p.beta << " gamma " << p.gamma << " phi " << p.phi);
    CHECK(p.alpha > 0);
    CHECK(p.alpha < 1);
    CHECK(model::CheckParams(fit->spec, p, model::ParamRegion::kUsual).ok());
    if (fit->spec.has_trend()) CHECK(p.beta < p.alpha);
    if (fit->spec.has_season()) CHECK(p.gamma < 1 - p.alpha);
    if (fit->spec.damped()) {
      CHECK(p.phi >= 0.8);
      CHECK(p.phi <= 0.98);
    }
    CHECK(std::isfinite(fit->loglik));
    CHECK(fit->evaluations > 0);
  }
}

TEST_CASE("maximum likelihood improves on the heuristic start", "[fit]") {
  const auto y = SeasonalSeries(240, 8);
  const ModelSpec spec = Form("ETS(A,A,A)", 12);
  FitOptions o;
  o.period = 12;
  auto fit = FitModel(spec, y, o);
  REQUIRE(fit.ok());
  auto start = HeuristicState(spec, y);
  REQUIRE(start.ok());
  auto at_start = model::EvaluateLikelihood(spec, Params{0.5, 0.05, 0.05, 1.0}, *start, y);
  REQUIRE(at_start.ok());
  CHECK(fit->loglik > at_start->loglik);
  CHECK(fit->converged);
  // The initial seasonal states are normalised.
  double sum = 0;
  for (double s : model::SeasonChronological(fit->initial_state)) sum += s;
  CHECK(std::fabs(sum) < 1e-9);
}

TEST_CASE("a range override bounds the estimate", "[fit]") {
  const auto y = SeasonalSeries(240, 9);
  FitOptions o;
  o.period = 12;
  o.alpha.lower = 0.6;
  o.alpha.upper = 0.7;  // the true alpha is 0.3: the estimate should sit on the lower bound
  o.phi.lower = 0.9;
  o.phi.upper = 0.95;
  auto fit = FitModel(Form("ETS(A,Ad,A)", 12), y, o);
  REQUIRE(fit.ok());
  CHECK(fit->params.alpha >= 0.6);
  CHECK(fit->params.alpha <= 0.7);
  CHECK(fit->params.alpha == Approx(0.6).margin(1e-3));
  CHECK(fit->params.phi >= 0.9);
  CHECK(fit->params.phi <= 0.95);
}

TEST_CASE("fixed parameters are used exactly and not counted", "[fit]") {
  const auto y = SeasonalSeries(240, 10);
  FitOptions o;
  o.period = 12;
  const ModelSpec spec = Form("ETS(A,Ad,A)", 12);
  auto free_fit = FitModel(spec, y, o);
  o.alpha.fixed = 0.25;
  o.beta.fixed = 0.02;
  o.phi.fixed = 0.9;
  auto fixed_fit = FitModel(spec, y, o);
  REQUIRE(free_fit.ok());
  REQUIRE(fixed_fit.ok());
  CHECK(fixed_fit->params.alpha == 0.25);
  CHECK(fixed_fit->params.beta == 0.02);
  CHECK(fixed_fit->params.phi == 0.9);
  CHECK(fixed_fit->k == free_fit->k - 3);
  CHECK(fixed_fit->k == model::CountParameters(spec) - 3);
  CHECK(fixed_fit->loglik <= free_fit->loglik + 1e-6);
}

TEST_CASE("options are validated with the field named", "[fit]") {
  FitOptions o;
  o.alpha.fixed = 1.5;
  Status s = ValidateOptions(o);
  CHECK(s.code() == StatusCode::kInvalidArgument);
  CHECK(s.message().find("alpha") != std::string::npos);
  o = FitOptions{};
  o.beta.lower = 0.5;
  o.beta.upper = 0.2;
  CHECK(ValidateOptions(o).message().find("beta") != std::string::npos);
  o = FitOptions{};
  o.phi.fixed = 0.9;
  o.phi.lower = 0.8;
  CHECK(!ValidateOptions(o).ok());
  o = FitOptions{};
  o.period = 4;
  o.forms = {ModelSpec{ErrorType::kAdditive, TrendType::kNone, SeasonType::kAdditive, 12}};
  CHECK(ValidateOptions(o).message().find("period") != std::string::npos);
  o = FitOptions{};
  o.region = model::ParamRegion::kAdmissible;
  o.alpha.fixed = 1.5;  // allowed in the admissible region's box
  CHECK(ValidateOptions(o).ok());
  CHECK(ValidateOptions(FitOptions{}).ok());
}

TEST_CASE("short history drops seasonal forms with a reason", "[fit][select]") {
  auto y = SeasonalSeries(40, 11);  // < 2 x 24
  FitOptions o;
  o.period = 24;
  auto sel = SelectModel(y, o);
  REQUIRE(sel.ok());
  int skipped_seasonal = 0;
  for (const Candidate& c : sel->candidates) {
    if (c.spec.has_season()) {
      CHECK(c.outcome == CandidateOutcome::kSkipped);
      CHECK(c.reason.find("2 full periods") != std::string::npos);
      ++skipped_seasonal;
    }
  }
  CHECK(skipped_seasonal > 0);
  CHECK_FALSE(sel->best().spec.has_season());
}

TEST_CASE("non-positive data skip multiplicative forms with a reason", "[fit][select]") {
  auto y = SeasonalSeries(120, 12);
  for (double& v : y) v -= 200;  // crosses zero
  FitOptions o;
  o.period = 12;
  auto sel = SelectModel(y, o);
  REQUIRE(sel.ok());
  CHECK_FALSE(sel->positive_data);
  int skipped = 0;
  for (const Candidate& c : sel->candidates) {
    if (c.spec.needs_positive_data()) {
      CHECK(c.outcome == CandidateOutcome::kSkipped);
      CHECK(c.reason.find("strictly positive") != std::string::npos);
      ++skipped;
    } else {
      CHECK(c.outcome == CandidateOutcome::kFitted);
    }
  }
  CHECK(skipped == 9);  // M error x {N, A, Ad} x {N, A, M}
  CHECK_FALSE(sel->best().spec.needs_positive_data());
}

TEST_CASE("selection ranks fitted candidates by AICc", "[fit][select]") {
  const auto y = SeasonalSeries(180, 13);
  FitOptions o;
  o.period = 12;
  auto sel = SelectModel(y, o);
  REQUIRE(sel.ok());
  CHECK(sel->chosen == 0);
  double prev = -std::numeric_limits<double>::infinity();
  for (const Candidate& c : sel->candidates) {
    if (c.outcome != CandidateOutcome::kFitted) continue;
    CHECK(c.fit->criteria.aicc >= prev);
    prev = c.fit->criteria.aicc;
  }
  CHECK(sel->candidates.size() == model::DefaultCandidates(12, true).size());
}

TEST_CASE("error and damped restrictions narrow the candidates", "[fit][select]") {
  const auto y = SeasonalSeries(120, 14);
  FitOptions o;
  o.period = 12;
  o.error = ErrorType::kMultiplicative;
  o.allow_damped = false;
  auto sel = SelectModel(y, o);
  REQUIRE(sel.ok());
  for (const Candidate& c : sel->candidates) {
    CHECK(c.spec.error == ErrorType::kMultiplicative);
    CHECK_FALSE(c.spec.damped());
  }
}

TEST_CASE("fitting is deterministic across calls and threads", "[fit][select]") {
  const auto y = SeasonalSeries(150, 15);
  FitOptions o;
  o.period = 12;
  o.forms = {Form("ETS(A,Ad,A)", 12), Form("ETS(M,A,M)", 12), Form("ETS(A,N,N)", 1)};
  auto first = SelectModel(y, o);
  REQUIRE(first.ok());
  std::vector<Result<Selection>> parallel(2, Status::Internal("not run"));
  std::thread a([&] { parallel[0] = SelectModel(y, o); });
  std::thread b([&] { parallel[1] = SelectModel(y, o); });
  a.join();
  b.join();
  for (const auto& r : parallel) {
    REQUIRE(r.ok());
    REQUIRE(r->candidates.size() == first->candidates.size());
    for (size_t i = 0; i < r->candidates.size(); ++i) {
      const FitResult& x = *r->candidates[i].fit;
      const FitResult& z = *first->candidates[i].fit;
      CHECK(x.spec == z.spec);
      CHECK(x.loglik == z.loglik);  // bit-identical
      CHECK(x.params == z.params);
      CHECK(x.initial_state.season == z.initial_state.season);
      CHECK(x.evaluations == z.evaluations);
    }
  }
}

TEST_CASE("missing values are skipped, infinite ones refused", "[fit]") {
  auto y = SeasonalSeries(120, 16);
  y[10] = y[50] = y[51] = std::numeric_limits<double>::quiet_NaN();
  FitOptions o;
  o.period = 12;
  auto fit = FitModel(Form("ETS(A,A,A)", 12), y, o);
  REQUIRE(fit.ok());
  CHECK(fit->n == 117);
  y[20] = std::numeric_limits<double>::infinity();
  auto bad = SelectModel(y, o);
  REQUIRE_FALSE(bad.ok());
  CHECK(bad.status().message().find("observation 20") != std::string::npos);
  std::vector<double> none(30, std::numeric_limits<double>::quiet_NaN());
  CHECK_FALSE(SelectModel(none, o).ok());
}

TEST_CASE("too short a history for every candidate is an error listing reasons", "[fit][select]") {
  std::vector<double> y = {1, 2, 3};
  auto sel = SelectModel(y, FitOptions{});
  REQUIRE_FALSE(sel.ok());
  CHECK(sel.status().message().find("ETS(A,N,N)") != std::string::npos);
  CHECK(sel.status().message().find("observations") != std::string::npos);
}

TEST_CASE("long periods keep the heuristic seasonal states", "[fit]") {
  std::vector<double> y;
  for (int t = 0; t < 3 * 48; ++t) y.push_back(50 + 10 * std::sin(2 * 3.14159265358979 * t / 48) + (t * 37 % 11) * 0.3);
  const ModelSpec spec = Form("ETS(A,N,A)", 48);
  FitOptions o;
  o.period = 48;
  auto fit = FitModel(spec, y, o);
  REQUIRE(fit.ok());
  CHECK_FALSE(fit->seasonal_states_estimated);
  auto start = HeuristicState(spec, y);
  REQUIRE(start.ok());
  CHECK(model::SeasonChronological(fit->initial_state) == model::SeasonChronological(*start));
  CHECK(fit->k == model::CountParameters(spec) - 47);
  o.max_estimated_season = 48;
  auto full = FitModel(spec, y, o);
  REQUIRE(full.ok());
  CHECK(full->seasonal_states_estimated);
}

TEST_CASE("budgets stop a fit and say why", "[fit]") {
  const auto y = SeasonalSeries(240, 17);
  FitOptions o;
  o.period = 12;
  o.max_evaluations = 30;
  auto fit = FitModel(Form("ETS(A,Ad,A)", 12), y, o);
  REQUIRE(fit.ok());
  CHECK_FALSE(fit->converged);
  CHECK(fit->stop == StopReason::kEvaluationBudget);
  CHECK(fit->evaluations <= 31);
  o.max_evaluations = 3000;
  o.max_seconds_per_form = 0.05;  // 50 clock reads of the stepping clock
  SteppingClock clock;
  auto timed = FitModel(Form("ETS(A,Ad,A)", 12), y, o, clock);
  REQUIRE(timed.ok());
  CHECK(timed->stop == StopReason::kTimeBudget);
  CHECK_FALSE(timed->converged);
  CHECK(StopReasonName(timed->stop) == "time budget");
}

TEST_CASE("admissible region fits stay admissible", "[fit]") {
  const auto y = SeasonalSeries(200, 18);
  FitOptions o;
  o.period = 12;
  o.region = model::ParamRegion::kAdmissible;
  for (const char* form : {"ETS(A,A,N)", "ETS(A,N,A)"}) {
    auto fit = FitModel(Form(form, 12), y, o);
    REQUIRE(fit.ok());
    CHECK(model::CheckParams(fit->spec, fit->params, model::ParamRegion::kAdmissible).ok());
    FitOptions usual = o;
    usual.region = model::ParamRegion::kUsual;
    auto u = FitModel(Form(form, 12), y, usual);
    REQUIRE(u.ok());
    // The admissible region contains the usual one: its optimum is at least as good.
    CHECK(fit->loglik >= u->loglik - 1e-6 * std::fabs(u->loglik));
  }
}

}  // namespace
}  // namespace plimsoll::fit

namespace plimsoll::fit {
namespace {

// In a selection, each multiplicative-error form with additive components starts from its
// additive-error twin's optimum, each multiplicative-season form from its additive-season twin's,
// each additive-error damped form from its undamped twin's (one start instead of three): it must
// end at least as high as the same form fitted on its own with the generic starts, on positive
// seasonal data of both error types.
TEST_CASE("twin-seeded multiplicative-error fits in a selection match standalone fits", "[fit][select]") {
  for (ErrorType error : {ErrorType::kAdditive, ErrorType::kMultiplicative}) {
    const auto y = SeasonalSeries(240, 19, error);
    FitOptions o;
    o.period = 12;
    auto sel = SelectModel(y, o);
    REQUIRE(sel.ok());
    int seeded = 0;
    for (const Candidate& c : sel->candidates) {
      if (!c.fit || (c.spec.error != ErrorType::kMultiplicative && !c.spec.damped())) continue;
      ++seeded;
      auto alone = FitModel(c.spec, y, o);
      REQUIRE(alone.ok());
      INFO(c.spec.Notation() << ": in selection " << c.fit->loglik << ", alone " << alone->loglik);
      CHECK(c.fit->loglik >= alone->loglik - 1e-6 * std::fabs(alone->loglik));
      CHECK(c.fit->converged);
    }
    // M error with trend N, A, Ad and season N, A (error twins), M (season twins); A error
    // damped with season N, A (trend twins).
    CHECK(seeded == 11);
  }
}

}  // namespace
}  // namespace plimsoll::fit
