#include <catch2/catch.hpp>

#include <cmath>
#include <vector>

#include "plimsoll/model/forecast.h"
#include "plimsoll/model/simulate.h"
#include "plimsoll/model/update.h"

namespace plimsoll::model {
namespace {

State SeasonalState(const ModelSpec& spec, double sigma2) {
  std::vector<double> season;
  for (int k = 0; k < (spec.has_season() ? spec.period : 0); ++k) {
    season.push_back(spec.season == SeasonType::kMultiplicative ? 1.0 + 0.1 * std::cos(k) : 5.0 * std::cos(k));
  }
  return MakeState(100.0, spec.multiplicative_trend() ? 1.01 : 1.0, season, sigma2);
}

TEST_CASE("normal quantiles match tabulated values", "[model]") {
  // Values from memory of standard normal tables, to the digits shown (R qnorm agrees).
  CHECK(NormalQuantile(0.5) == 0.0);
  CHECK(NormalQuantile(0.975) == Approx(1.959963984540054).epsilon(1e-15));
  CHECK(NormalQuantile(0.995) == Approx(2.5758293035489004).epsilon(1e-15));
  CHECK(NormalQuantile(0.9) == Approx(1.2815515655446004).epsilon(1e-15));
  CHECK(NormalQuantile(0.841344746068543) == Approx(1.0).epsilon(1e-13));
  CHECK(NormalQuantile(0.01) == Approx(-2.3263478740408408).epsilon(1e-15));
  CHECK(NormalQuantile(1e-10) == Approx(-6.361340902404056).epsilon(1e-13));
  CHECK(NormalQuantile(1 - 1e-10) == Approx(6.361340889697422).epsilon(1e-8));  // 1 - 1e-10 is inexact
  CHECK(TwoSidedZ(95) == Approx(1.959963984540054).epsilon(1e-15));
  for (double p = 0.001; p < 1; p += 0.0137) CHECK(NormalQuantile(p) == Approx(-NormalQuantile(1 - p)).epsilon(1e-12));
}

TEST_CASE("one-step band is exact for both error types", "[model]") {
  Band a = OneStepBand(*ParseModelSpec("AAN", 1), 100.0, 4.0, 1.96);
  CHECK(a.lower == Approx(100 - 1.96 * 2));
  CHECK(a.upper == Approx(100 + 1.96 * 2));
  Band m = OneStepBand(*ParseModelSpec("MAN", 1), 100.0, 0.0004, 1.96);
  CHECK(m.lower == Approx(100 * (1 - 1.96 * 0.02)));
  CHECK(m.upper == Approx(100 * (1 + 1.96 * 0.02)));
}

TEST_CASE("forecast validates its options", "[model]") {
  const ModelSpec spec = *ParseModelSpec("ANN", 1);
  State st = MakeState(1, 0, {}, 1.0);
  ForecastOptions o;
  o.horizon = 0;
  CHECK(Forecast(spec, {}, st, o).status().code() == StatusCode::kInvalidArgument);
  o = {};
  o.levels = {95, 100};
  CHECK(Forecast(spec, {}, st, o).status().message().find("level 100") != std::string::npos);
  st.sigma2 = -1;
  CHECK_FALSE(Forecast(spec, {}, st, {}).ok());
  ForecastOptions sim;
  sim.paths = 1;
  CHECK_FALSE(Forecast(*ParseModelSpec("MAM", 4), {}, SeasonalState(*ParseModelSpec("MAM", 4), 0.01), sim).ok());
  CHECK(AnalyticVariances(*ParseModelSpec("MAM", 4), {}, SeasonalState(*ParseModelSpec("MAM", 4), 0.01), 4)
            .status()
            .code() == StatusCode::kNotFound);
}

TEST_CASE("class 1 coefficients equal the closed form c_j = alpha + beta phi_j + gamma d_jm", "[model]") {
  // Hyndman, Koehler, Ord & Snyder (2008), ch. 6, ETS(A,Ad,A): c_j = alpha + beta (phi + ... + phi^j)
  // + gamma [j mod m == 0]; v_h = s2 (1 + sum_{j<h} c_j^2).
  const ModelSpec spec = *ParseModelSpec("AAdA", 7);
  const Params p{0.35, 0.04, 0.15, 0.92};
  auto v = AnalyticVariances(spec, p, SeasonalState(spec, 2.0), 40);
  REQUIRE(v.ok());
  double acc = 1.0, phi_j = 0.0;
  for (int h = 1; h <= 40; ++h) {
    CHECK((*v)[h - 1] == Approx(2.0 * acc).epsilon(1e-12));
    phi_j += std::pow(p.phi, h);
    const double c = p.alpha + p.beta * phi_j + (h % 7 == 0 ? p.gamma : 0.0);
    acc += c * c;
  }
}

TEST_CASE("analytic and simulated distributions agree", "[model]") {
  for (const char* form : {"AAdA", "MAdN", "MNA"}) {
    INFO(form);
    const ModelSpec spec = *ParseModelSpec(form, 4);
    const double s2 = spec.error == ErrorType::kAdditive ? 4.0 : 0.0004;
    const State st = SeasonalState(spec, s2);
    const Params p{0.4, 0.05, 0.1, 0.9};
    ForecastOptions o;
    o.horizon = 8;
    o.paths = 40000;
    auto analytic = Forecast(spec, p, st, o);
    o.force_simulation = true;
    auto simulated = Forecast(spec, p, st, o);
    REQUIRE(analytic.ok());
    REQUIRE(simulated.ok());
    CHECK(analytic->method == VarianceMethod::kAnalytic);
    CHECK(simulated->method == VarianceMethod::kSimulated);
    for (int h = 0; h < 8; ++h) {
      const auto& a = analytic->steps[h];
      const auto& s = simulated->steps[h];
      CHECK(a.mean == Approx(PointForecast(spec, p, st, h + 1)));
      // Monte-Carlo error with 40000 paths: mean within ~5 sd/sqrt(N), variance within ~4%.
      CHECK(std::abs(s.mean - a.mean) < 5 * std::sqrt(a.variance / 40000));
      CHECK(s.variance == Approx(a.variance).epsilon(0.04));
      CHECK(s.intervals[1].upper == Approx(a.intervals[1].upper).epsilon(0.01));
    }
  }
}

TEST_CASE("simulated forecasts are reproducible and ordered", "[model]") {
  const ModelSpec spec = *ParseModelSpec("MAdM", 12);
  const State st = SeasonalState(spec, 0.001);
  ForecastOptions o;
  o.horizon = 30;
  o.levels = {50, 80, 95, 99};
  o.paths = 2000;
  auto a = Forecast(spec, {0.3, 0.05, 0.1, 0.95}, st, o);
  auto b = Forecast(spec, {0.3, 0.05, 0.1, 0.95}, st, o);
  REQUIRE(a.ok());
  CHECK(a->method == VarianceMethod::kSimulated);
  for (int h = 0; h < 30; ++h) {
    CHECK(a->steps[h].mean == b->steps[h].mean);
    const auto& iv = a->steps[h].intervals;
    REQUIRE(iv.size() == 4);
    for (size_t k = 1; k < iv.size(); ++k) {
      CHECK(iv[k].lower <= iv[k - 1].lower);
      CHECK(iv[k].upper >= iv[k - 1].upper);
    }
    CHECK(iv[0].lower <= a->steps[h].mean);
    CHECK(a->steps[h].mean <= iv[0].upper * 1.001);
  }
  o.seed = 43;
  auto c = Forecast(spec, {0.3, 0.05, 0.1, 0.95}, st, o);
  CHECK(c->steps[5].mean != a->steps[5].mean);
}

TEST_CASE("variance grows with the horizon for every form", "[model]") {
  for (const ModelSpec& spec : AllForms(4)) {
    INFO(spec.Notation());
    const double s2 = spec.error == ErrorType::kAdditive ? 1.0 : 0.0001;
    ForecastOptions o;
    o.horizon = 12;
    o.paths = 3000;
    auto f = Forecast(spec, {0.3, 0.05, 0.1, 0.9}, SeasonalState(spec, s2), o);
    REQUIRE(f.ok());
    CHECK(f->steps[0].variance == Approx(spec.error == ErrorType::kAdditive ? 1.0 : 0.0001 * f->steps[0].mean * f->steps[0].mean).epsilon(0.08));
    CHECK(f->steps[11].variance > f->steps[0].variance);
  }
}

}  // namespace
}  // namespace plimsoll::model
