// The initial-state solve: for fixed smoothing parameters it must reach the best initial state,
// i.e. no single-coordinate move (keeping the seasonal normalisation) improves the likelihood.
#include <catch2/catch.hpp>

#include <cmath>
#include <string>
#include <vector>

#include "fit/state_solver.h"
#include "plimsoll/model/likelihood.h"
#include "plimsoll/model/simulate.h"
#include "plimsoll/model/spec.h"

namespace plimsoll::fit {
namespace {

// A smooth seasonal pattern for `spec` (factors around 1 or offsets around 0); empty without season.
std::vector<double> SineSeason(const model::ModelSpec& spec, int m) {
  std::vector<double> season;
  for (int j = 0; j < (spec.has_season() ? m : 0); ++j) {
    const double v = std::sin(2 * 3.14159265358979 * (j + 0.5) / m);
    season.push_back(spec.season == model::SeasonType::kMultiplicative ? 1.0 + 0.2 * v : 15.0 * v);
  }
  return season;
}

double NegLoglik(const model::ModelSpec& spec, const model::Params& p, double level, double trend,
                 const std::vector<double>& season, const std::vector<double>& y) {
  auto r = model::EvaluateLikelihood(spec, p, model::MakeState(level, trend, season), y);
  REQUIRE(r.ok());
  return -r->loglik;
}

// Without gaps the additive-season forms take the shifted-column solve (seasonal columns as
// shifts of one), with a gap the general one; both must reach the optimum.
TEST_CASE("the state solve reaches a point no coordinate move improves", "[fit]") {
  const int m = 12;
  for (bool gap : {true, false}) {
    for (const char* form : {"ETS(A,Ad,A)", "ETS(A,N,A)", "ETS(M,A,A)", "ETS(M,Ad,A)", "ETS(M,N,M)", "ETS(A,N,N)"}) {
      auto spec = model::ParseModelSpec(form, m);
      REQUIRE(spec.ok());
      const bool mult_season = spec->season == model::SeasonType::kMultiplicative;
      const std::vector<double> truth_season = SineSeason(*spec, m);
      const model::Params p{0.3, spec->has_trend() ? 0.003 : 0.0, spec->has_season() ? 0.1 : 0.0,
                            spec->damped() ? 0.9 : 1.0};
      std::vector<double> y = model::SimulateSeries(*spec, p, model::MakeState(400, 0.3, truth_season),
                                                    spec->error == model::ErrorType::kAdditive ? 9.0 : 0.0009, 240, 31);
      if (gap) y[17] = std::nan("");  // a gap must be stepped over, not counted
      // Start away from the truth: level off by 5%, slope by 20%, half the seasonal amplitude.
      double level = 380, trend = spec->has_trend() ? 0.24 : 0.0;
      std::vector<double> season = truth_season;
      for (double& s : season) s = mult_season ? 0.5 * (1.0 + s) : 0.5 * s;
      StateSolver solver(*spec, y, true);
      int passes = 0;
      {
        auto r0 = model::EvaluateLikelihood(*spec, p, model::MakeState(level, trend, season), y);
        INFO(form << " start: " << r0.status().ToString());
        CHECK(r0.ok());
      }
      const double f = solver.Solve(p, level, trend, season, &passes);
      INFO(form << (gap ? " with a gap" : " without gaps") << ": -loglik " << f << " after " << passes << " passes");
      REQUIRE(std::isfinite(f));
      const double exact = NegLoglik(*spec, p, level, trend, season, y);
      CHECK(f == Approx(exact).epsilon(1e-9));
      CHECK(f <= NegLoglik(*spec, p, 400, 0.3, truth_season, y));
      // Coordinate probes of +-1e-4 (relative to the state's size) must not improve beyond roundoff.
      const double tol = 1e-10 * std::fabs(f);
      for (double h : {1e-4, -1e-4}) {
        CHECK(NegLoglik(*spec, p, level + h * 400, trend, season, y) >= f - tol);
        if (spec->has_trend()) CHECK(NegLoglik(*spec, p, level, trend + h, season, y) >= f - tol);
        for (size_t j = 0; j + 1 < season.size(); ++j) {
          std::vector<double> moved = season;
          const double d = h * (mult_season ? 1.0 : 15.0);
          moved[j] += d;
          moved.back() -= d;
          CHECK(NegLoglik(*spec, p, level, trend, moved, y) >= f - tol);
        }
      }
      if (spec->has_season()) {
        double sum = 0;
        for (double s : season) sum += s;
        CHECK(sum == Approx(mult_season ? m : 0.0).margin(1e-9));
      }
    }
  }
}

}  // namespace
}  // namespace plimsoll::fit

namespace plimsoll::fit {
namespace {

// The gradient the optimiser is given: d(-loglik)/d(alpha, beta, gamma, phi) at a fixed state must
// match central differences of model::EvaluateLikelihood, for every shape the pass implements
// (with a gap in the history).
TEST_CASE("the parameter gradient matches central differences of the likelihood", "[fit]") {
  const int m = 12;
  for (const char* form : {"ETS(A,N,N)", "ETS(A,Ad,N)", "ETS(A,A,A)", "ETS(A,Ad,A)", "ETS(M,Ad,N)", "ETS(M,Ad,A)",
                           "ETS(M,N,M)", "ETS(M,Ad,M)"}) {
    auto spec = model::ParseModelSpec(form, m);
    REQUIRE(spec.ok());
    const std::vector<double> season = SineSeason(*spec, m);
    const model::Params truth{0.3, spec->has_trend() ? 0.02 : 0.0, spec->has_season() ? 0.1 : 0.0,
                              spec->damped() ? 0.9 : 1.0};
    std::vector<double> y = model::SimulateSeries(*spec, truth, model::MakeState(400, 0.3, season),
                                                  spec->error == model::ErrorType::kAdditive ? 9.0 : 0.0009, 240, 7);
    y[40] = std::nan("");
    // Away from the simulating values, so no partial derivative is near zero by construction.
    const model::Params at{0.41, spec->has_trend() ? 0.05 : 0.0, spec->has_season() ? 0.07 : 0.0,
                           spec->damped() ? 0.93 : 1.0};
    StateSolver solver(*spec, y, true);
    double g[4];
    REQUIRE(solver.ParamGradient(at, 395, 0.25, season, g));
    for (int i = 0; i < 4; ++i) {
      if ((i == 1 && !spec->has_trend()) || (i == 2 && !spec->has_season()) || (i == 3 && !spec->damped())) {
        CHECK(g[i] == 0.0);
        continue;
      }
      const double h = 1e-6;
      model::Params up = at, down = at;
      double* u = i == 0 ? &up.alpha : i == 1 ? &up.beta : i == 2 ? &up.gamma : &up.phi;
      double* d = i == 0 ? &down.alpha : i == 1 ? &down.beta : i == 2 ? &down.gamma : &down.phi;
      *u += h;
      *d -= h;
      const double numeric =
          (NegLoglik(*spec, up, 395, 0.25, season, y) - NegLoglik(*spec, down, 395, 0.25, season, y)) / (2 * h);
      INFO(form << " parameter " << i << ": analytic " << g[i] << " numeric " << numeric);
      CHECK(g[i] == Approx(numeric).epsilon(1e-5).margin(1e-3));
    }
  }
}

}  // namespace
}  // namespace plimsoll::fit
