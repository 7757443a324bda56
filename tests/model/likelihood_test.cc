#include <catch2/catch.hpp>

#include <cmath>
#include <limits>
#include <numbers>
#include <vector>

#include "plimsoll/model/likelihood.h"
#include "plimsoll/model/simulate.h"
#include "plimsoll/model/update.h"

namespace plimsoll::model {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

TEST_CASE("concentrated log-likelihood equals the formula over a direct recursion", "[model]") {
  for (const char* form : {"ANN", "AAdA", "MAdM", "MNN", "AAM"}) {
    INFO(form);
    const ModelSpec spec = *ParseModelSpec(form, 4);
    const Params p{0.4, 0.05, 0.1, 0.9};
    State start = MakeState(50.0, 0.2, {});
    if (spec.has_season()) {
      start.season = spec.season == SeasonType::kMultiplicative ? std::vector<double>{1.1, 0.9, 1.05, 0.95}
                                                               : std::vector<double>{3, -2, 1, -2};
    }
    std::vector<double> y = SimulateSeries(spec, p, start, spec.error == ErrorType::kAdditive ? 4.0 : 0.002, 80, 7);
    y[10] = kNaN;
    y[41] = kNaN;
    // Direct: run Update and sum by hand.
    State st = start;
    double sse = 0, slog = 0;
    int n = 0;
    for (double v : y) {
      StepResult r = Update(spec, p, st, v);
      if (std::isnan(v)) continue;
      sse += r.innovation * r.innovation;
      if (spec.error == ErrorType::kMultiplicative) slog += std::log(std::abs(r.mu));
      ++n;
    }
    const double s2 = sse / n;
    const double want = -0.5 * n * (std::log(2 * std::numbers::pi * s2) + 1) - slog;
    std::vector<double> fitted, resid;
    auto lik = EvaluateLikelihood(spec, p, start, y, {&fitted, &resid});
    REQUIRE(lik.ok());
    CHECK(lik->n == 78);
    CHECK(lik->loglik == Approx(want).epsilon(1e-12));
    CHECK(lik->sigma2 == Approx(s2).epsilon(1e-13));
    CHECK(lik->final_state.level == st.level);
    CHECK(lik->final_state.steps == 80);
    REQUIRE(fitted.size() == y.size());
    CHECK(std::isnan(resid[10]));
    CHECK(std::isfinite(fitted[10]));
    // The traced and untraced paths agree.
    auto plain = EvaluateLikelihood(spec, p, start, y);
    REQUIRE(plain.ok());
    CHECK(plain->loglik == lik->loglik);
  }
}

TEST_CASE("non-positive forecasts under M error fail naming the step", "[model]") {
  const ModelSpec spec = *ParseModelSpec("MAN", 1);
  std::vector<double> y = {10, 8, 6, 4, 2, 1, 0.5};
  // Steep negative trend drives mu below zero.
  auto r = EvaluateLikelihood(spec, {0.1, 0.05, 0, 1}, MakeState(10.0, -4.0, {}), y);
  REQUIRE_FALSE(r.ok());
  CHECK(r.status().code() == StatusCode::kNumericFailure);
  CHECK(r.status().message().find("step 2") != std::string::npos);
  // The same data under A error is fine.
  CHECK(EvaluateLikelihood(*ParseModelSpec("AAN", 1), {0.1, 0.05, 0, 1}, MakeState(10.0, -4.0, {}), y).ok());
}

TEST_CASE("a series with no observations or a bad state is refused", "[model]") {
  const ModelSpec ann = *ParseModelSpec("ANN", 1);
  std::vector<double> gaps = {kNaN, kNaN};
  auto r = EvaluateLikelihood(ann, {}, MakeState(1, 0, {}), gaps);
  REQUIRE_FALSE(r.ok());
  CHECK(r.status().code() == StatusCode::kInvalidArgument);
  std::vector<double> y = {1, 2, 3};
  auto wrong = EvaluateLikelihood(*ParseModelSpec("ANA", 4), {0.5, 0, 0.1, 1}, MakeState(1, 0, std::vector<double>{0, 0}), y);
  REQUIRE_FALSE(wrong.ok());
  CHECK(wrong.status().message().find("needs 4") != std::string::npos);
  auto inf = EvaluateLikelihood(ann, {0.5, 0, 0, 1}, MakeState(std::numeric_limits<double>::infinity(), 0, {}), y);
  REQUIRE_FALSE(inf.ok());
  CHECK(inf.status().message().find("step 0") != std::string::npos);
}

TEST_CASE("information criteria follow their formulas", "[model]") {
  // AIC = -2 logL + 2k; AICc = AIC + 2k(k+1)/(n-k-1); BIC = -2 logL + k ln n.
  InformationCriteria c = Criteria(-100.0, 50, 5);
  CHECK(c.aic == Approx(210.0));
  CHECK(c.aicc == Approx(210.0 + 60.0 / 44.0));
  CHECK(c.bic == Approx(200.0 + 5 * std::log(50.0)));
  CHECK(std::isinf(Criteria(-1.0, 6, 5).aicc));
}

TEST_CASE("parameter count uses m-1 free seasonal states", "[model]") {
  CHECK(CountParameters(*ParseModelSpec("ANN", 1)) == 3);
  CHECK(CountParameters(*ParseModelSpec("AAN", 1)) == 5);
  CHECK(CountParameters(*ParseModelSpec("AAdN", 1)) == 6);
  CHECK(CountParameters(*ParseModelSpec("MNA", 12)) == 3 + 1 + 11);
  CHECK(CountParameters(*ParseModelSpec("MAdM", 24)) == 6 + 1 + 23);
}

}  // namespace
}  // namespace plimsoll::model
