#include <catch2/catch.hpp>

#include <cmath>
#include <limits>
#include <vector>

#include "plimsoll/fit/initial.h"
#include "plimsoll/model/spec.h"
#include "plimsoll/model/state.h"

namespace plimsoll::fit {
namespace {

using model::ModelSpec;
using model::SeasonType;
using model::TrendType;
using model::ErrorType;

ModelSpec Spec(ErrorType e, TrendType t, SeasonType s, int m) { return ModelSpec{e, t, s, s == SeasonType::kNone ? 1 : m}; }

TEST_CASE("heuristic recovers an additive season and a linear trend exactly", "[fit][initial]") {
  // y[t] = 100 + 2 (t + 1) + s[t mod 4]: a 2x4 moving average of a line plus a zero-sum season is
  // the line itself, so the decomposition is exact.
  const std::vector<double> s = {10, -5, 3, -8};
  std::vector<double> y;
  for (int t = 0; t < 40; ++t) y.push_back(100 + 2.0 * (t + 1) + s[t % 4]);
  auto st = HeuristicState(Spec(ErrorType::kAdditive, TrendType::kAdditive, SeasonType::kAdditive, 4), y);
  REQUIRE(st.ok());
  CHECK(st->level == Approx(100.0).margin(1e-9));
  CHECK(st->trend == Approx(2.0).margin(1e-9));
  const auto chrono = model::SeasonChronological(*st);
  REQUIRE(chrono.size() == 4);
  for (int j = 0; j < 4; ++j) CHECK(chrono[j] == Approx(s[j]).margin(1e-9));
}

TEST_CASE("heuristic multiplicative seasonals have mean one", "[fit][initial]") {
  const std::vector<double> s = {1.2, 0.8, 1.1, 0.9, 1.3, 0.7};  // mean 1
  std::vector<double> y;
  for (int t = 0; t < 30; ++t) y.push_back(50.0 * s[t % 6]);
  auto st = HeuristicState(Spec(ErrorType::kMultiplicative, TrendType::kNone, SeasonType::kMultiplicative, 6), y);
  REQUIRE(st.ok());
  CHECK(st->level == Approx(50.0).epsilon(1e-12));
  const auto chrono = model::SeasonChronological(*st);
  double mean = 0;
  for (int j = 0; j < 6; ++j) {
    CHECK(chrono[j] == Approx(s[j]).epsilon(1e-12));
    mean += chrono[j] / 6;
  }
  CHECK(mean == Approx(1.0).epsilon(1e-14));
}

TEST_CASE("heuristic normalises additive seasonals to sum zero on noisy data", "[fit][initial]") {
  std::vector<double> y;
  for (int t = 0; t < 36; ++t) y.push_back(20 + 0.3 * t + 5 * std::sin(t * 0.5236) + ((t * 7919) % 13) * 0.1);
  auto st = HeuristicState(Spec(ErrorType::kAdditive, TrendType::kAdditiveDamped, SeasonType::kAdditive, 12), y);
  REQUIRE(st.ok());
  double sum = 0;
  for (double v : model::SeasonChronological(*st)) sum += v;
  CHECK(std::fabs(sum) < 1e-10);
}

TEST_CASE("seasonal heuristic refuses fewer than two full periods", "[fit][initial]") {
  std::vector<double> y(47, 5.0);
  auto st = HeuristicState(Spec(ErrorType::kAdditive, TrendType::kNone, SeasonType::kAdditive, 24), y);
  REQUIRE_FALSE(st.ok());
  CHECK(st.status().message().find("2 full periods") != std::string::npos);
  y.push_back(5.0);
  CHECK(HeuristicState(Spec(ErrorType::kAdditive, TrendType::kNone, SeasonType::kAdditive, 24), y).ok());
}

TEST_CASE("non-seasonal heuristic fits a line through the first ten values", "[fit][initial]") {
  std::vector<double> y;
  for (int t = 0; t < 10; ++t) y.push_back(7.0 - 0.5 * (t + 1));
  for (int t = 0; t < 10; ++t) y.push_back(1000.0);  // beyond the window: must not matter
  auto st = HeuristicState(Spec(ErrorType::kAdditive, TrendType::kAdditive, SeasonType::kNone, 1), y);
  REQUIRE(st.ok());
  CHECK(st->level == Approx(7.0));
  CHECK(st->trend == Approx(-0.5));
  auto flat = HeuristicState(Spec(ErrorType::kAdditive, TrendType::kNone, SeasonType::kNone, 1), y);
  REQUIRE(flat.ok());
  CHECK(flat->level == Approx(7.0 - 0.5 * 5.5));  // mean of the first ten
}

TEST_CASE("heuristic skips missing values", "[fit][initial]") {
  const double nan = std::numeric_limits<double>::quiet_NaN();
  const std::vector<double> s = {4, -4, 2, -2};
  std::vector<double> y;
  for (int t = 0; t < 24; ++t) y.push_back(t == 5 || t == 9 ? nan : 10 + s[t % 4]);
  auto st = HeuristicState(Spec(ErrorType::kAdditive, TrendType::kNone, SeasonType::kAdditive, 4), y);
  REQUIRE(st.ok());
  CHECK(std::isfinite(st->level));
  CHECK(st->level == Approx(10.0).margin(1e-9));
  const auto chrono = model::SeasonChronological(*st);
  for (int j = 0; j < 4; ++j) CHECK(chrono[j] == Approx(s[j]).margin(1e-9));
}

TEST_CASE("heuristic for a multiplicative form refuses non-positive values", "[fit][initial]") {
  std::vector<double> y = {3, 4, 0, 5, 6, 7};
  auto st = HeuristicState(Spec(ErrorType::kMultiplicative, TrendType::kNone, SeasonType::kNone, 1), y);
  REQUIRE_FALSE(st.ok());
  CHECK(st.status().message().find("observation 2") != std::string::npos);
}

}  // namespace
}  // namespace plimsoll::fit
