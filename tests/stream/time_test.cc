#include "plimsoll/stream/time.h"

#include <catch2/catch.hpp>

namespace plimsoll::stream {
namespace {

int64_t Iso(std::string_view s) {
  Result<int64_t> r = ParseIsoTime(s);
  INFO(s << ": " << r.status().ToString());
  REQUIRE(r.ok());
  return *r;
}

std::string IsoError(std::string_view s) {
  Result<int64_t> r = ParseIsoTime(s);
  REQUIRE_FALSE(r.ok());
  return r.status().message();
}

}  // namespace

// Epoch values below were computed with GNU date (`date -u -d 2026-03-01T08:15:30Z +%s`), i.e.
// an independent implementation of the same calendar arithmetic.
TEST_CASE("iso dates and date-times parse to epoch milliseconds", "[stream]") {
  CHECK(Iso("1970-01-01") == 0);
  CHECK(Iso("2026-03-01") == 1772323200000);
  CHECK(Iso("2026-03-01T08:15") == 1772352900000);
  CHECK(Iso("2026-03-01T08:15:30") == 1772352930000);
  CHECK(Iso("2026-03-01T08:15:30Z") == 1772352930000);
  CHECK(Iso("2026-03-01t08:15:30z") == 1772352930000);
  CHECK(Iso("2026-03-01 08:15:30") == 1772352930000);
  CHECK(Iso("2024-02-29T23:59:59Z") == 1709251199000);
  CHECK(Iso("1969-12-31T23:59:59Z") == -1000);
}

TEST_CASE("iso fractional seconds keep milliseconds and truncate the rest", "[stream]") {
  CHECK(Iso("2026-03-01T08:15:30.5Z") == 1772352930500);
  CHECK(Iso("2026-03-01T08:15:30.25Z") == 1772352930250);
  CHECK(Iso("2026-03-01T08:15:30.123Z") == 1772352930123);
  CHECK(Iso("2026-03-01T08:15:30.123999Z") == 1772352930123);
  CHECK(Iso("2026-03-01T08:15:30,5Z") == 1772352930500);
}

TEST_CASE("iso offsets shift to UTC", "[stream]") {
  const int64_t utc = Iso("2026-03-01T08:15:30Z");
  CHECK(Iso("2026-03-01T10:15:30+02:00") == utc);
  CHECK(Iso("2026-03-01T10:15:30+0200") == utc);
  CHECK(Iso("2026-03-01T10:15:30+02") == utc);
  CHECK(Iso("2026-03-01T02:45:30-05:30") == utc);
  CHECK(Iso("2026-03-01T08:15:30.000+00:00") == utc);
}

TEST_CASE("iso parser names what is wrong", "[stream]") {
  CHECK(IsoError("2026-13-01") == "month 13 is not in 1..12");
  CHECK(IsoError("2026-02-29") == "day 29 is not in 1..28 for 2026-02");
  CHECK(IsoError("2026-04-31T00:00Z") == "day 31 is not in 1..30 for 2026-04");
  CHECK(IsoError("2026-03-01T24:00Z") == "hour 24 is not in 0..23");
  CHECK(IsoError("2026-03-01T08:60Z") == "minute 60 is not in 0..59");
  CHECK(IsoError("2026-03-01T08:15:60Z") == "leap second 60 is not supported");
  CHECK(IsoError("2026-03-01T08:15:30.Z") == "expected digits after the decimal mark");
  CHECK(IsoError("2026-03-01T08:15:30Zjunk") == "unexpected text after 'Z'");
  CHECK(IsoError("2026-03-01T08:15:30+25:00") == "offset +25:00 is out of range");
  CHECK(IsoError("2026-03-01T8:15Z") == "expected hh:mm after 'T'");
  CHECK(IsoError("26-03-01") == "expected YYYY-MM-DD at the start");
  CHECK(IsoError("2026-03-01X") == "expected 'T' after the date");
  CHECK(IsoError("") == "expected YYYY-MM-DD at the start");
}

TEST_CASE("epoch numbers below 1e11 are seconds, above are milliseconds", "[stream]") {
  CHECK(*EpochToMillis(1772352930.0) == 1772352930000);
  CHECK(*EpochToMillis(1772352930123.0) == 1772352930123);
  CHECK(*EpochToMillis(1772352930.25) == 1772352930250);
  CHECK(*EpochToMillis(99'999'999'999.0) == 99'999'999'999'000);  // just below: seconds (year 5138)
  CHECK(*EpochToMillis(100'000'000'000.0) == 100'000'000'000);     // at the threshold: milliseconds
  CHECK_FALSE(EpochToMillis(1e300).ok());
}

TEST_CASE("time text accepts epoch numbers and iso strings", "[stream]") {
  CHECK(*ParseTimeText("1772352930") == 1772352930000);
  CHECK(*ParseTimeText("1772352930123") == 1772352930123);
  CHECK(*ParseTimeText("1772352930.5") == 1772352930500);
  CHECK(*ParseTimeText("2026-03-01T08:15:30Z") == 1772352930000);
  Result<int64_t> bad = ParseTimeText("2026-13-01");
  REQUIRE_FALSE(bad.ok());
  CHECK(bad.status().message() == "time '2026-13-01' is not ISO-8601 or epoch: month 13 is not in 1..12");
  CHECK(ParseTimeText("yesterday").status().message() ==
        "time 'yesterday' is not ISO-8601 or epoch: not a number");
  CHECK_FALSE(ParseTimeText("").ok());
  CHECK_FALSE(ParseTimeText("12abc").ok());
}

TEST_CASE("iso formatting round-trips through the parser", "[stream]") {
  CHECK(FormatIsoTime(0) == "1970-01-01T00:00:00Z");
  CHECK(FormatIsoTime(1772352930250) == "2026-03-01T08:15:30.250Z");
  CHECK(FormatIsoTime(-1000) == "1969-12-31T23:59:59Z");
  for (int64_t ms : {int64_t{0}, int64_t{951782400000}, int64_t{1772352930250}, int64_t{7258118399999},
                     int64_t{-86400001}, int64_t{4102444800000}}) {
    CHECK(Iso(FormatIsoTime(ms)) == ms);
  }
}

TEST_CASE("durations parse units, compounds and none", "[stream]") {
  CHECK(*ParseDuration("15m") == 900'000);
  CHECK(*ParseDuration("1h") == 3'600'000);
  CHECK(*ParseDuration("30s") == 30'000);
  CHECK(*ParseDuration("1d") == 86'400'000);
  CHECK(*ParseDuration("2w") == 14 * 86'400'000LL);
  CHECK(*ParseDuration("500ms") == 500);
  CHECK(*ParseDuration("1h30m") == 5'400'000);
  CHECK(*ParseDuration("0") == 0);
  CHECK(*ParseDuration("0s") == 0);
  Result<std::optional<int64_t>> none = ParseDuration("none");
  REQUIRE(none.ok());
  CHECK_FALSE(none->has_value());
}

TEST_CASE("durations refuse bad text with the reason", "[stream]") {
  CHECK(ParseDuration("15x").status().message() == "duration '15x' has unknown unit 'x' (use ms, s, m, h, d, w)");
  CHECK(ParseDuration("15").status().message() == "duration '15' lacks a unit (use ms, s, m, h, d, w)");
  CHECK(ParseDuration("").status().message() == "duration '' is empty (use e.g. 15m, 1h, 30s, 1d or none)");
  CHECK_FALSE(ParseDuration("-5m").ok());
  CHECK_FALSE(ParseDuration("m").ok());
  CHECK_FALSE(ParseDuration("99999999999999999w").ok());
}

TEST_CASE("durations format back to the text they parse from", "[stream]") {
  CHECK(FormatDuration(0) == "0s");
  CHECK(FormatDuration(5'400'000) == "1h30m");
  CHECK(FormatDuration(900'000) == "15m");
  CHECK(FormatDuration(1500) == "1s500ms");
  for (int64_t ms : {int64_t{1}, int64_t{60'000}, int64_t{86'400'000}, int64_t{694'861'001}}) {
    CHECK(**ParseDuration(FormatDuration(ms)) == ms);
  }
}

}  // namespace plimsoll::stream
