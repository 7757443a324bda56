#include <catch2/catch.hpp>

#include <cmath>
#include <string>

#include "plimsoll/fit/series_file.h"

namespace plimsoll::fit {
namespace {

TEST_CASE("series text accepts one value a line with a header", "[fit][file]") {
  auto s = ParseSeriesText("pickups\n12\n 13.5 \r\n\n# note\n1e2\n", "a.txt");
  REQUIRE(s.ok());
  CHECK(s->had_header);
  REQUIRE(s->values.size() == 3);
  CHECK(s->values[1] == 13.5);
  CHECK(s->values[2] == 100.0);
  CHECK(s->lines == std::vector<int>{2, 3, 6});
  CHECK(s->times.empty());
}

TEST_CASE("series text reads time,value rows and missing values", "[fit][file]") {
  auto s = ParseSeriesText("time,value\n2026-01-01T00:00,4\n2026-01-01T01:00,\n2026-01-01T02:00,NA\n2026-01-01T03:00,6",
                           "b.csv");
  REQUIRE(s.ok());
  REQUIRE(s->values.size() == 4);
  CHECK(std::isnan(s->values[1]));
  CHECK(std::isnan(s->values[2]));
  CHECK(s->times[3] == "2026-01-01T03:00");
}

TEST_CASE("series text names the line of a non-numeric value", "[fit][file]") {
  auto s = ParseSeriesText("value\n1\n2\nthree\n4\n", "c.csv");
  REQUIRE_FALSE(s.ok());
  CHECK(s.status().message() == "c.csv line 4: value 'three' is not a number");
}

TEST_CASE("series text without a header rejects a later bad line", "[fit][file]") {
  auto s = ParseSeriesText("1\n2\nx\n", "d.csv");
  REQUIRE_FALSE(s.ok());
  CHECK(s.status().message().find("line 3") != std::string::npos);
}

TEST_CASE("series text rejects too many fields, infinities and mixed layouts", "[fit][file]") {
  auto many = ParseSeriesText("1\n2,3,4\n", "e.csv");
  REQUIRE_FALSE(many.ok());
  CHECK(many.status().message().find("e.csv line 2") != std::string::npos);
  auto inf = ParseSeriesText("1\ninf\n", "f.csv");
  REQUIRE_FALSE(inf.ok());
  CHECK(inf.status().message().find("line 2") != std::string::npos);
  auto mixed = ParseSeriesText("t1,1\nt2,2\n3\n", "g.csv");
  REQUIRE_FALSE(mixed.ok());
  CHECK(mixed.status().message().find("line 3") != std::string::npos);
}

TEST_CASE("series text with no values is an error", "[fit][file]") {
  for (const char* text : {"", "\n\n", "value\n", "# only a comment\n"}) {
    auto s = ParseSeriesText(text, "h.csv");
    REQUIRE_FALSE(s.ok());
    CHECK(s.status().message().find("no values") != std::string::npos);
  }
}

TEST_CASE("missing series file is an io error naming the path", "[fit][file]") {
  auto s = ReadSeriesFile("/nonexistent/plimsoll/x.csv");
  REQUIRE_FALSE(s.ok());
  CHECK(s.status().code() == StatusCode::kIoError);
  CHECK(s.status().message().find("/nonexistent/plimsoll/x.csv") != std::string::npos);
}

}  // namespace
}  // namespace plimsoll::fit
