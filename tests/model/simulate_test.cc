#include <catch2/catch.hpp>

#include <cmath>
#include <vector>

#include "plimsoll/model/likelihood.h"
#include "plimsoll/model/simulate.h"
#include "plimsoll/model/update.h"

namespace plimsoll::model {
namespace {

TEST_CASE("same seed gives the same series, another seed another", "[model]") {
  const ModelSpec spec = *ParseModelSpec("MAdM", 4);
  const State st = MakeState(100, 1, std::vector<double>{1.1, 0.9, 1.0, 1.0});
  const Params p{0.3, 0.05, 0.1, 0.9};
  auto a = SimulateSeries(spec, p, st, 0.001, 100, 11);
  CHECK(a == SimulateSeries(spec, p, st, 0.001, 100, 11));
  CHECK(a != SimulateSeries(spec, p, st, 0.001, 100, 12));
  CHECK(a.size() == 100);
  CHECK(SimulateSeries(spec, p, st, 0.001, 0, 11).empty());
}

TEST_CASE("zero innovations reproduce the point forecasts", "[model]") {
  for (const ModelSpec& spec : AllForms(4)) {
    const State st = MakeState(100, spec.multiplicative_trend() ? 1.02 : 2.0,
                               spec.has_season() ? std::vector<double>{1.1, 0.9, 1.05, 0.95} : std::vector<double>{});
    const Params p{0.3, 0.05, 0.1, 0.9};
    std::vector<double> zeros(9, 0.0);
    auto y = SimulateWithErrors(spec, p, st, zeros);
    for (int h = 1; h <= 9; ++h) CHECK(y[h - 1] == Approx(PointForecast(spec, p, st, h)).epsilon(1e-12));
  }
}

TEST_CASE("simulated innovations have the requested variance", "[model]") {
  // Fitting the generating model back to its own series recovers sigma^2 (innovations are
  // relative for M error).
  for (const char* form : {"AAdA", "MAdM"}) {
    const ModelSpec spec = *ParseModelSpec(form, 4);
    const State st = MakeState(100, 1, std::vector<double>{1.1, 0.9, 1.05, 0.95});
    const Params p{0.3, 0.05, 0.1, 0.9};
    const double s2 = spec.error == ErrorType::kAdditive ? 9.0 : 0.0009;
    auto y = SimulateSeries(spec, p, st, s2, 20000, 5);
    auto lik = EvaluateLikelihood(spec, p, st, y);
    REQUIRE(lik.ok());
    CHECK(lik->sigma2 == Approx(s2).epsilon(0.03));
  }
}

}  // namespace
}  // namespace plimsoll::model
