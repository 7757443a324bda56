#include <catch2/catch.hpp>

#include <cmath>
#include <set>
#include <string>

#include "plimsoll/model/params.h"
#include "plimsoll/model/spec.h"

namespace plimsoll::model {
namespace {

TEST_CASE("taxonomy notation parses in every accepted spelling", "[model]") {
  for (const char* text : {"ETS(M,Ad,M)", "ets(m,ad,m)", "MAdM", "madm", "M,Ad,M", " ETS( M , Ad , M ) "}) {
    INFO(text);
    auto spec = ParseModelSpec(text, 24);
    REQUIRE(spec.ok());
    CHECK(spec->error == ErrorType::kMultiplicative);
    CHECK(spec->trend == TrendType::kAdditiveDamped);
    CHECK(spec->season == SeasonType::kMultiplicative);
    CHECK(spec->period == 24);
    CHECK(spec->Notation() == "ETS(M,Ad,M)");
  }
  auto ann = ParseModelSpec("ANN", 12);
  REQUIRE(ann.ok());
  CHECK(ann->period == 1);  // non-seasonal forms carry period 1 whatever the profile says
  auto amdn = ParseModelSpec("AMdN", 1);
  REQUIRE(amdn.ok());
  CHECK(amdn->trend == TrendType::kMultiplicativeDamped);
}

TEST_CASE("every form prints and parses back to itself", "[model]") {
  const auto forms = AllForms(7);
  CHECK(forms.size() == 30);
  std::set<std::string> names;
  for (const ModelSpec& spec : forms) {
    names.insert(spec.Notation());
    auto back = ParseModelSpec(spec.Notation(), 7);
    REQUIRE(back.ok());
    CHECK(*back == spec);
  }
  CHECK(names.size() == 30);
  CHECK(AllForms(1).size() == 10);
}

TEST_CASE("malformed specs are rejected naming the bad part", "[model]") {
  auto bad_trend = ParseModelSpec("ETS(A,X,N)", 1);
  REQUIRE_FALSE(bad_trend.ok());
  CHECK(bad_trend.status().code() == StatusCode::kInvalidArgument);
  CHECK(bad_trend.status().message().find("trend 'X' is not one of N, A, Ad, M, Md") != std::string::npos);
  CHECK(bad_trend.status().message().find("ETS(A,X,N)") != std::string::npos);

  auto bad_error = ParseModelSpec("QAN", 1);
  REQUIRE_FALSE(bad_error.ok());
  CHECK(bad_error.status().message().find("error 'Q'") != std::string::npos);

  auto bad_season = ParseModelSpec("A,N,Z", 1);
  REQUIRE_FALSE(bad_season.ok());
  CHECK(bad_season.status().message().find("season 'Z'") != std::string::npos);

  auto short_period = ParseModelSpec("AAA", 1);
  REQUIRE_FALSE(short_period.ok());
  CHECK(short_period.status().message().find("period 1") != std::string::npos);

  CHECK_FALSE(ParseModelSpec("", 1).ok());
  CHECK_FALSE(ParseModelSpec("ETS(A,N)", 1).ok());
  CHECK_FALSE(ParseModelSpec("ETS A,N,N", 1).ok());
  CHECK_FALSE(ParseModelSpec("AAAAA", 4).ok());
  CHECK_FALSE(ParseModelSpec("A,N,N,N", 1).ok());
  CHECK_FALSE(ParseModelSpec("ANN", 0).ok());
}

TEST_CASE("spelled-out specs parse and reject unknown words", "[model]") {
  auto spec = ParseSpelledModelSpec("multiplicative", "additive_damped", "additive", 12);
  REQUIRE(spec.ok());
  CHECK(spec->Notation() == "ETS(M,Ad,A)");
  CHECK(spec->period == 12);
  auto bad = ParseSpelledModelSpec("additive", "damped", "none", 1);
  REQUIRE_FALSE(bad.ok());
  CHECK(bad.status().message().find("trend 'damped'") != std::string::npos);
}

TEST_CASE("default candidates are the stable forms allowed by the data", "[model]") {
  CHECK(DefaultCandidates(12, true).size() == 15);
  CHECK(DefaultCandidates(1, true).size() == 6);
  CHECK(DefaultCandidates(12, false).size() == 6);  // A error, N/A/Ad trend, N/A season
  CHECK(DefaultCandidates(1, false).size() == 3);
  for (const ModelSpec& spec : DefaultCandidates(12, true)) {
    CHECK(spec.is_stable());
    CHECK_FALSE(spec.multiplicative_trend());
  }
  CHECK_FALSE(ParseModelSpec("AAM", 12)->is_stable());
  CHECK_FALSE(ParseModelSpec("MMN", 1)->is_stable());
  CHECK(ParseModelSpec("MAdM", 12)->is_stable());
}

TEST_CASE("usual region bounds each parameter and names the one outside", "[model]") {
  const ModelSpec aada = *ParseModelSpec("AAdA", 4);
  CHECK(CheckParams(aada, {0.5, 0.1, 0.2, 0.9}, ParamRegion::kUsual).ok());
  Status s = CheckParams(aada, {0.5, 0.6, 0.2, 0.9}, ParamRegion::kUsual);
  CHECK(s.code() == StatusCode::kOutOfRange);
  CHECK(s.message().find("beta") != std::string::npos);
  CHECK(CheckParams(aada, {0.5, 0.1, 0.5, 0.9}, ParamRegion::kUsual).message().find("gamma") != std::string::npos);
  CHECK(CheckParams(aada, {0.5, 0.1, 0.2, 0.99}, ParamRegion::kUsual).message().find("phi") != std::string::npos);
  CHECK(CheckParams(aada, {1.0, 0.1, 0.2, 0.9}, ParamRegion::kUsual).message().find("alpha") != std::string::npos);
  // Unused parameters are ignored.
  CHECK(CheckParams(*ParseModelSpec("ANN", 1), {0.5, 7.0, 7.0, 7.0}, ParamRegion::kUsual).ok());
}

TEST_CASE("admissible region reports the offending eigenvalue", "[model]") {
  const ModelSpec ann = *ParseModelSpec("ANN", 1);
  Status s = CheckParams(ann, {2.5, 0, 0, 1}, ParamRegion::kAdmissible);
  CHECK(s.code() == StatusCode::kOutOfRange);
  CHECK(s.message().find("eigenvalue") != std::string::npos);
  // Damped forms need phi in (0, 1].
  CHECK_FALSE(CheckParams(*ParseModelSpec("AAdN", 1), {0.5, 0.1, 0, 1.2}, ParamRegion::kAdmissible).ok());
  CHECK_FALSE(CheckParams(ann, {NAN, 0, 0, 1}, ParamRegion::kAdmissible).ok());
}

}  // namespace
}  // namespace plimsoll::model
