// Fixed-parameter checks against python3-statsmodels 0.13.5 (Debian 12), ETSModel, on datasets it
// ships (sources in each fixture's header and in make_reference_fixtures.py): Nile flow (Cobb
// 1978, Biometrika 65(2)), Mauna Loa CO2 (Keeling & Whorf 2004, CDIAC), euro area electrical
// equipment turnover (Eurostat), Nino 1+2 index (NOAA CPC ERSST.V3B).
// Fixtures: tests/model/fixtures/*.csv, written by make_reference_fixtures.py.
#include <catch2/catch.hpp>

#include <cmath>
#include <string>

#include "model/fixture_util.h"
#include "plimsoll/model/likelihood.h"
#include "plimsoll/model/simulate.h"
#include "plimsoll/model/update.h"

namespace plimsoll::model {
namespace {

using testing::CloseRel;
using testing::Fixture;
using testing::FixtureDir;
using testing::ReadFixture;

constexpr double kRel = 1e-9;  // relative to max(|value|, 1)

// Forms without a multiplicative season: statsmodels' smoother follows the published
// error-correction equations, so fitted values, residuals, states and llf must match.
TEST_CASE("fixed-parameter smoothing matches statsmodels ETSModel", "[model][reference]") {
  const char* cases[] = {"ANN", "AAN", "AAdN", "ANA", "AAA", "AAdA", "MNN", "MAN", "MAdN", "MAA", "MAdA"};
  for (const char* name : cases) {
    const Fixture f = ReadFixture(FixtureDir() + "/smooth_" + name + ".csv");
    const ModelSpec spec = f.Spec();
    const Params params = f.ParamValues();
    const State initial = f.InitialState();
    const std::vector<double> y = f.Column("y");
    INFO(spec.Notation() << " on " << f.meta.at("dataset") << " (statsmodels " << f.meta.at("statsmodels") << ")");
    REQUIRE(y.size() >= 90);

    std::vector<double> fitted, resid;
    auto lik = EvaluateLikelihood(spec, params, initial, y, {&fitted, &resid});
    REQUIRE(lik.ok());
    const double llf = f.MetaNumber("llf");
    INFO("loglik " << lik->loglik << " vs statsmodels llf " << llf);
    CHECK(std::abs(lik->loglik - llf) <= kRel * std::abs(llf));

    const auto want_fitted = f.Column("fitted");
    const auto want_resid = f.Column("resid");
    const auto want_level = f.Column("level");
    const auto want_trend = f.Column("trend");
    const auto want_season = f.Column("season");
    State st = initial;
    int mismatches = 0;
    for (size_t t = 0; t < y.size(); ++t) {
      StepResult r = Update(spec, params, st, y[t]);
      bool ok = CloseRel(fitted[t], want_fitted[t], kRel) && CloseRel(resid[t], want_resid[t], kRel) &&
                CloseRel(r.mu, want_fitted[t], kRel) && CloseRel(st.level, want_level[t], kRel);
      if (spec.has_trend()) ok = ok && CloseRel(st.trend, want_trend[t], kRel);
      if (spec.has_season()) {
        const size_t m = st.season.size();
        const double newest = st.season[(st.head + m - 1) % m];  // the slot just written
        ok = ok && CloseRel(newest, want_season[t], kRel);
      }
      if (!ok && ++mismatches <= 3) {
        UNSCOPED_INFO("t=" << t << " fitted " << fitted[t] << " vs " << want_fitted[t] << ", resid " << resid[t]
                           << " vs " << want_resid[t] << ", level " << st.level << " vs " << want_level[t]);
      }
    }
    CHECK(mismatches == 0);
  }
}

// Multiplicative-season forms: statsmodels' smoother updates the season with the method form
// gamma* y_t / l_t + (1 - gamma*) s_{t-m}, not the published state-space equation
// s_t = s_{t-m} + gamma e_t / (l_{t-1} + phi b_{t-1}) (Hyndman, Koehler, Ord & Snyder 2008,
// ch. 2, Table 2.3) that we implement; its simulate(..., random_errors=E) follows the published
// equations. So both simulators get the same error matrix and the paths must agree.
TEST_CASE("multiplicative-season simulation matches statsmodels simulate with shared errors",
          "[model][reference]") {
  for (const char* name : {"MAM", "MAdM", "MNM", "AAM"}) {
    const Fixture f = ReadFixture(FixtureDir() + "/simulate_" + name + ".csv");
    const ModelSpec spec = f.Spec();
    INFO(spec.Notation() << " from " << f.meta.at("dataset"));
    const auto path = f.Column("path");
    const auto errors = f.Column("error");
    const auto want = f.Column("y");
    const int paths = static_cast<int>(path.back()) + 1;
    REQUIRE(paths >= 2);
    const size_t steps = want.size() / static_cast<size_t>(paths);
    for (int p = 0; p < paths; ++p) {
      const size_t base = static_cast<size_t>(p) * steps;
      std::vector<double> e(errors.begin() + static_cast<long>(base), errors.begin() + static_cast<long>(base + steps));
      const std::vector<double> got = SimulateWithErrors(spec, f.ParamValues(), f.InitialState(), e);
      for (size_t t = 0; t < steps; ++t) {
        INFO("path " << p << " t " << t);
        CHECK(CloseRel(got[t], want[base + t], kRel));
      }
    }
  }
}

}  // namespace
}  // namespace plimsoll::model
