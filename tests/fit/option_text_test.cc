#include <catch2/catch.hpp>

#include "plimsoll/fit/option_text.h"

namespace plimsoll::fit {
namespace {

TEST_CASE("parameter overrides parse as fixed values or ranges", "[fit][text]") {
  auto fixed = ParseParamControl("0.3", "alpha");
  REQUIRE(fixed.ok());
  CHECK(fixed->fixed == 0.3);
  CHECK_FALSE(fixed->lower);
  auto range = ParseParamControl("0.1:0.5", "beta");
  REQUIRE(range.ok());
  CHECK(range->lower == 0.1);
  CHECK(range->upper == 0.5);
  CHECK_FALSE(range->fixed);
  auto upper_only = ParseParamControl(":0.95", "phi");
  REQUIRE(upper_only.ok());
  CHECK_FALSE(upper_only->lower);
  CHECK(upper_only->upper == 0.95);
  auto bad = ParseParamControl("abc", "gamma");
  REQUIRE_FALSE(bad.ok());
  CHECK(bad.status().message().find("gamma") != std::string::npos);
  CHECK_FALSE(ParseParamControl("0.5:0.1", "alpha").ok());
  CHECK_FALSE(ParseParamControl(":", "alpha").ok());
}

TEST_CASE("form lists split at top-level commas", "[fit][text]") {
  auto forms = ParseFormList("ETS(A,Ad,A), ETS(M,N,M),ANN", 12);
  REQUIRE(forms.ok());
  REQUIRE(forms->size() == 3);
  CHECK((*forms)[0].Notation() == "ETS(A,Ad,A)");
  CHECK((*forms)[0].period == 12);
  CHECK((*forms)[1].Notation() == "ETS(M,N,M)");
  CHECK((*forms)[2].Notation() == "ETS(A,N,N)");
  CHECK((*forms)[2].period == 1);
  auto none = ParseFormList("auto", 12);
  REQUIRE(none.ok());
  CHECK(none->empty());
  auto seasonal_without_period = ParseFormList("ETS(A,N,A)", 1);
  REQUIRE_FALSE(seasonal_without_period.ok());
  CHECK(seasonal_without_period.status().message().find("period") != std::string::npos);
  auto bad = ParseFormList("ETS(A,X,N)", 1);
  REQUIRE_FALSE(bad.ok());
  CHECK(bad.status().message().find("ETS(A,X,N)") != std::string::npos);
}

}  // namespace
}  // namespace plimsoll::fit
