#include "plimsoll/stream/fit_chooser.h"

#include <catch2/catch.hpp>
#include <cmath>
#include <vector>

#include "plimsoll/model/simulate.h"

namespace plimsoll::stream {

TEST_CASE("the chooser widens sigma2 by n / (n - k), counting heuristic seasonal states as estimated",
          "[stream]") {
  for (int period : {12, 48}) {  // 12: seasonal states estimated; 48 (> 24): kept from the heuristic
    INFO("period " << period);
    std::vector<double> season(period);
    for (int k = 0; k < period; ++k) season[k] = 10.0 * std::sin(2 * M_PI * k / period);
    const model::ModelSpec spec{model::ErrorType::kAdditive, model::TrendType::kNone, model::SeasonType::kAdditive,
                                period};
    std::vector<double> y = model::SimulateSeries(spec, model::Params{0.2, 0, 0.05, 1}, model::MakeState(50, 0, season),
                                                  1.0, 3 * period + 40, 7);
    SeriesRules rules;
    rules.period = period;
    rules.forms = {spec};
    fit::FitOptions options;
    Result<ModelChoice> choice = MakeFitChooser(options)(y, rules, false);
    REQUIRE(choice.ok());
    options.period = period;
    options.forms = {spec};
    Result<fit::Selection> direct = fit::SelectModel(y, options);
    REQUIRE(direct.ok());
    const fit::FitResult& best = direct->best();
    const int k = best.k + (best.seasonal_states_estimated ? 0 : period - 1);
    CHECK(best.seasonal_states_estimated == (period <= 24));
    CHECK(choice->initial.sigma2 == Approx(best.sigma2 * best.n / (best.n - k)).epsilon(1e-12));
    CHECK(choice->initial.sigma2 > best.sigma2 * 1.1);
  }
}

}  // namespace plimsoll::stream
