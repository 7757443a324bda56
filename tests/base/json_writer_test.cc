#include "plimsoll/base/json_writer.h"

#include <catch2/catch.hpp>
#include <cmath>
#include <limits>

namespace plimsoll {

TEST_CASE("json writer nests, separates and escapes", "[base]") {
  JsonWriter w;
  w.BeginObject();
  w.Field("bench", "update");
  w.Key("rows").BeginArray();
  w.BeginObject().Field("form", "ETS(A,Ad,A)").Field("m", 24).EndObject();
  w.BeginObject().Field("quote", "a\"b\\c\n").EndObject();
  w.EndArray();
  w.Field("ok", true);
  w.Key("none").Null();
  w.EndObject();
  CHECK(w.str() ==
        R"J({"bench":"update","rows":[{"form":"ETS(A,Ad,A)","m":24},{"quote":"a\"b\\c\n"}],"ok":true,"none":null})J");
}

TEST_CASE("json numbers round-trip and non-finite values become null", "[base]") {
  CHECK(FormatJsonNumber(1.5) == "1.5");
  CHECK(std::stod(FormatJsonNumber(0.1 + 0.2)) == 0.1 + 0.2);
  CHECK(FormatJsonNumber(std::numeric_limits<double>::quiet_NaN()) == "null");
  CHECK(FormatJsonNumber(-std::numeric_limits<double>::infinity()) == "null");
  std::string s;
  AppendJsonString(s, std::string("\x01", 1));
  CHECK(s == "\"\\u0001\"");
}

}  // namespace plimsoll
