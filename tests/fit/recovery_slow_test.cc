// Parameter recovery and form selection on series simulated from known models (n = 2000, fixed
// seeds, model::SimulateSeries). Tolerances: 0.02-0.08 on the smoothing parameters and 12% on
// sigma2, a few times the deviations seen across seeds when writing this test (0.002-0.04 and
// <= 4%); a fit that stops in a wrong basin or biases a parameter fails them.
#include <catch2/catch.hpp>

#include <cmath>
#include <string>
#include <vector>

#include "plimsoll/fit/fit.h"
#include "plimsoll/model/simulate.h"
#include "plimsoll/model/spec.h"

namespace plimsoll::fit {
namespace {

using model::ModelSpec;
using model::Params;

std::vector<double> Season(int m, double amplitude, bool multiplicative) {
  std::vector<double> s;
  for (int j = 0; j < m; ++j) {
    const double v = amplitude * std::sin(2 * 3.14159265358979 * (j + 0.5) / m);
    s.push_back(multiplicative ? 1.0 + v : v);
  }
  return s;
}

struct Truth {
  const char* form;
  int m;
  Params params;
  double level, trend, season_amplitude, sigma2;
  double tol_alpha, tol_beta, tol_gamma, tol_phi;
};

TEST_CASE("estimates land near the true parameters at n = 2000", "[fit][slow]") {
  const Truth truths[] = {
      {"ETS(A,N,N)", 1, {0.3, 0, 0, 1}, 50, 0, 0, 4.0, 0.05, 0, 0, 0},
      {"ETS(A,A,N)", 1, {0.4, 0.05, 0, 1}, 50, 0.2, 0, 4.0, 0.06, 0.03, 0, 0},
      {"ETS(A,Ad,A)", 12, {0.3, 0.05, 0.1, 0.9}, 0, 0.5, 20, 4.0, 0.06, 0.04, 0.06, 0.08},
      {"ETS(M,N,M)", 12, {0.2, 0, 0.1, 1}, 100, 0, 0.3, 0.0025, 0.05, 0, 0.05, 0},
      {"ETS(M,N,N)", 1, {0.3, 0, 0, 1}, 100, 0, 0, 0.0025, 0.05, 0, 0, 0},
  };
  for (const Truth& t : truths) {
    auto spec = model::ParseModelSpec(t.form, t.m);
    REQUIRE(spec.ok());
    const bool mult_season = spec->season == model::SeasonType::kMultiplicative;
    const auto init = model::MakeState(t.level, t.trend, spec->has_season() ? Season(t.m, t.season_amplitude, mult_season)
                                                                         : std::vector<double>{});
    for (uint64_t seed : {101u, 202u}) {
      const auto y = model::SimulateSeries(*spec, t.params, init, t.sigma2, 2000, seed);
      FitOptions o;
      o.period = t.m;
      auto fit = FitModel(*spec, y, o);
      INFO(t.form << " seed " << seed << ": " << fit.status().ToString());
      REQUIRE(fit.ok());
      const Params& p = fit->params;
      INFO(t.form << " seed " << seed << ": alpha " << p.alpha << " beta " << p.beta << " gamma " << p.gamma
                  << " phi " << p.phi << " sigma2 " << fit->sigma2);
      CHECK(std::fabs(p.alpha - t.params.alpha) <= t.tol_alpha);
      if (spec->has_trend()) CHECK(std::fabs(p.beta - t.params.beta) <= t.tol_beta);
      if (spec->has_season()) CHECK(std::fabs(p.gamma - t.params.gamma) <= t.tol_gamma);
      if (spec->damped()) CHECK(std::fabs(p.phi - t.params.phi) <= t.tol_phi);
      CHECK(fit->sigma2 == Approx(t.sigma2).epsilon(0.12));
      CHECK(fit->converged);
    }
  }
}

// Well separated: each truth is the richest form of its error type in the default set, with
// every component strong, and the error type identifiable (A-error series cross zero, so M forms
// are ruled out by the data; the M-error series' level wanders by a factor of ~2, so relative
// errors differ clearly from constant ones).
TEST_CASE("AICc picks the true form in at least 80% of trials", "[fit][slow]") {
  const Truth truths[] = {
      {"ETS(A,Ad,A)", 12, {0.3, 0.05, 0.15, 0.9}, 0, 1.0, 25, 4.0, 0, 0, 0, 0},
      {"ETS(M,Ad,M)", 12, {0.3, 0.03, 0.1, 0.9}, 100, 0.5, 0.3, 0.0025, 0, 0, 0, 0},
  };
  int trials = 0, right = 0;
  for (const Truth& t : truths) {
    auto spec = model::ParseModelSpec(t.form, t.m);
    REQUIRE(spec.ok());
    const bool mult_season = spec->season == model::SeasonType::kMultiplicative;
    const auto init = model::MakeState(t.level, t.trend, Season(t.m, t.season_amplitude, mult_season));
    int right_here = 0;
    for (uint64_t seed = 1; seed <= 5; ++seed) {
      const auto y = model::SimulateSeries(*spec, t.params, init, t.sigma2, 2000, 7000 + seed);
      FitOptions o;
      o.period = t.m;
      auto sel = SelectModel(y, o);
      REQUIRE(sel.ok());
      ++trials;
      const bool hit = sel->best().spec == *spec;
      right += hit;
      right_here += hit;
      UNSCOPED_INFO(t.form << " seed " << seed << " chose " << sel->best().spec.Notation());
    }
    WARN(t.form << ": chosen in " << right_here << " of 5 trials");
  }
  CHECK(right >= (8 * trials + 9) / 10);
}

}  // namespace
}  // namespace plimsoll::fit
