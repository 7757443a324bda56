#include "plimsoll/stream/decode.h"

#include <cmath>
#include <string>

#include <catch2/catch.hpp>

namespace plimsoll::stream {
namespace {

constexpr int64_t kT = 1772352930000;  // 2026-03-01T08:15:30Z (GNU date -u -d ... +%s)

struct Decoded {
  Status status;
  DecodedRecord rec;
  std::string series;  // copied: the record's view dies with the next decode
};

Decoded Run(std::string_view payload, std::string_view key = {}, int64_t ts = -1, DecodeOptions opt = {}) {
  RecordDecoder d(opt);
  Decoded out;
  out.status = d.Decode(key, payload, ts, out.rec);
  if (out.status.ok() && !out.rec.skip) out.series = std::string(out.rec.series);
  return out;
}

std::string Error(std::string_view payload, std::string_view key = {}, int64_t ts = -1, DecodeOptions opt = {}) {
  Decoded d = Run(payload, key, ts, opt);
  INFO(payload);
  REQUIRE_FALSE(d.status.ok());
  CHECK(d.status.code() == StatusCode::kInvalidArgument);
  return d.status.message();
}

void CheckRecord(const Decoded& d, std::string_view series, int64_t time_ms, double value) {
  INFO(d.status.ToString());
  REQUIRE(d.status.ok());
  CHECK_FALSE(d.rec.skip);
  CHECK(d.series == series);
  CHECK(d.rec.time_ms == time_ms);
  CHECK(d.rec.value == value);
}

}  // namespace

TEST_CASE("json record with iso time decodes", "[stream]") {
  CheckRecord(Run(R"({"series":"queue-7","time":"2026-03-01T08:15:30Z","value":12.5})"), "queue-7", kT, 12.5);
}

TEST_CASE("json record fields may come in any order with extra fields and spaces", "[stream]") {
  CheckRecord(Run(R"(  { "value" : -3e2, "unit":"calls", "time" : "2026-03-01T10:15:30+02:00",
                     "meta":{"a":[1,2,{"b":null}]}, "series" : "q\u00e9" }  )"),
              "q\xc3\xa9", kT, -300);
}

TEST_CASE("json epoch seconds and milliseconds are told apart", "[stream]") {
  CheckRecord(Run(R"({"series":"s","time":1772352930,"value":1})"), "s", kT, 1);
  CheckRecord(Run(R"({"series":"s","time":1772352930000,"value":1})"), "s", kT, 1);
  CheckRecord(Run(R"({"series":"s","time":1772352930.25,"value":1})"), "s", kT + 250, 1);
  CheckRecord(Run(R"({"series":"s","time":"1772352930123","value":1})"), "s", kT + 123, 1);
}

TEST_CASE("json iso variants all decode", "[stream]") {
  CheckRecord(Run(R"({"series":"s","time":"2026-03-01","value":1})"), "s", 1772323200000, 1);
  CheckRecord(Run(R"({"series":"s","time":"2026-03-01T08:15:30.500Z","value":1})"), "s", kT + 500, 1);
  CheckRecord(Run(R"({"series":"s","time":"2026-03-01 08:15:30","value":1})"), "s", kT, 1);
  CheckRecord(Run(R"({"series":"s","time":"2026-03-01T03:15:30-0500","value":1})"), "s", kT, 1);
}

TEST_CASE("json series with escapes is unescaped", "[stream]") {
  CheckRecord(Run(R"({"series":"a\"b\\c","time":1772352930,"value":2})"), "a\"b\\c", kT, 2);
}

TEST_CASE("malformed json is refused", "[stream]") {
  CHECK_THAT(Error(R"({"series":"s","time":1772352930,"value":1)"), Catch::StartsWith("malformed JSON"));
  CHECK_THAT(Error(R"({"series":"s" "time":1,"value":1})"), Catch::StartsWith("malformed JSON"));
  CHECK_THAT(Error(R"({"series":"s,"time":1,"value":1})"), Catch::StartsWith("malformed JSON"));
}

TEST_CASE("json with text after the object is refused", "[stream]") {
  CHECK_THAT(Error(R"({"series":"s","time":1772352930,"value":1} x)"), Catch::StartsWith("malformed JSON: "));
  CHECK_THAT(Error(R"({"series":"s","time":1772352930,"value":1}{})"), Catch::StartsWith("malformed JSON: "));
  CHECK_THAT(Error(R"({"series":"s","time":1772352930,"value":1} 5)"), Catch::StartsWith("malformed JSON: "));
}

TEST_CASE("json missing value is refused", "[stream]") {
  CHECK(Error(R"({"series":"s","time":1772352930})") == "field 'value' is missing");
}

TEST_CASE("json missing time is refused", "[stream]") {
  CHECK(Error(R"({"series":"s","value":1})") == "field 'time' is missing");
}

TEST_CASE("json missing time takes the broker timestamp when configured", "[stream]") {
  DecodeOptions opt;
  opt.broker_time_when_missing = true;
  CheckRecord(Run(R"({"series":"s","value":1})", {}, kT, opt), "s", kT, 1);
  CHECK(Error(R"({"series":"s","value":1})", {}, -1, opt) == "field 'time' is missing and the record has no timestamp");
}

TEST_CASE("json missing series without a key is refused", "[stream]") {
  CHECK(Error(R"({"time":1772352930,"value":1})") == "field 'series' is missing and the record has no key");
}

TEST_CASE("json value given as a string is refused", "[stream]") {
  CHECK(Error(R"({"series":"s","time":1772352930,"value":"12"})") == "field 'value' is not a number");
}

TEST_CASE("json value null is refused", "[stream]") {
  CHECK(Error(R"({"series":"s","time":1772352930,"value":null})") == "field 'value' is null");
}

TEST_CASE("json value out of double range is refused as non-finite", "[stream]") {
  CHECK(Error(R"({"series":"s","time":1772352930,"value":1e400})") == "field 'value' is not a finite number");
}

TEST_CASE("json NaN and Infinity tokens are refused", "[stream]") {
  CHECK_THAT(Error(R"({"series":"s","time":1772352930,"value":NaN})"), Catch::StartsWith("malformed JSON"));
  CHECK_THAT(Error(R"({"series":"s","time":1772352930,"value":Infinity})"), Catch::StartsWith("malformed JSON"));
}

TEST_CASE("json series of the wrong type is refused", "[stream]") {
  CHECK(Error(R"({"series":42,"time":1772352930,"value":1})") == "field 'series' is not a string");
}

TEST_CASE("json time of the wrong type is refused", "[stream]") {
  CHECK(Error(R"({"series":"s","time":true,"value":1})") == "field 'time' is not a string or number");
  CHECK(Error(R"({"series":"s","time":[1],"value":1})") == "field 'time' is not a string or number");
}

TEST_CASE("json duplicate fields are refused", "[stream]") {
  CHECK(Error(R"({"series":"s","time":1772352930,"value":1,"value":2})") == "field 'value' appears twice");
  CHECK(Error(R"({"series":"s","series":"t","time":1772352930,"value":1})") == "field 'series' appears twice");
}

TEST_CASE("unparseable time is refused with the text", "[stream]") {
  CHECK(Error(R"({"series":"s","time":"2026-13-01","value":1})") ==
        "time '2026-13-01' is not ISO-8601 or epoch: month 13 is not in 1..12");
  CHECK(Error(R"({"series":"s","time":"soon","value":1})") == "time 'soon' is not ISO-8601 or epoch: not a number");
}

TEST_CASE("absurd times outside the window are refused", "[stream]") {
  CHECK(Error(R"({"series":"s","time":"2250-01-01T00:00:00Z","value":1})") ==
        "time 2250-01-01T00:00:00Z is outside the accepted window [1970-01-01T00:00:00Z, 2200-01-01T00:00:00Z)");
  CHECK_THAT(Error(R"({"series":"s","time":-5,"value":1})"), Catch::StartsWith("time 1969-12-31T23:59:55Z is outside"));
  // An epoch in microseconds is read as milliseconds and lands far in the future.
  CHECK_THAT(Error(R"({"series":"s","time":1772352930000000,"value":1})"), Catch::Contains("outside the accepted window"));
}

TEST_CASE("the time window is configurable", "[stream]") {
  DecodeOptions opt;
  opt.min_time_ms = kT;
  opt.max_time_ms = kT + 1000;
  CheckRecord(Run(R"({"series":"s","time":1772352930,"value":1})", {}, -1, opt), "s", kT, 1);
  CHECK_THAT(Error(R"({"series":"s","time":1772352931,"value":1})", {}, -1, opt), Catch::Contains("outside"));
}

TEST_CASE("oversized records are refused before parsing", "[stream]") {
  const std::string big = R"({"series":"s","time":1772352930,"value":1,"pad":")" + std::string(70000, 'x') + "\"}";
  CHECK(Error(big) == "record of " + std::to_string(big.size()) + " bytes exceeds max_record_bytes 65536");
}

TEST_CASE("empty series id is refused", "[stream]") {
  CHECK(Error(R"({"series":"","time":1772352930,"value":1})") == "series id is empty");
  CHECK(Error(",1772352930,1") == "series id is empty");
}

TEST_CASE("series id longer than the limit is refused", "[stream]") {
  const std::string id(201, 'a');
  CHECK(Error(R"({"series":")" + id + R"(","time":1772352930,"value":1})") ==
        "series id of 201 bytes exceeds max_series_bytes 200");
}

TEST_CASE("series id with control characters is refused", "[stream]") {
  CHECK(Error(R"({"series":"a\tb","time":1772352930,"value":1})") == "series id contains control character 0x09");
}

TEST_CASE("csv series id with invalid utf-8 is refused", "[stream]") {
  CHECK(Error("a\xff,1772352930,1") == "series id is not valid UTF-8");
}

TEST_CASE("kafka key is the series for a json payload without series", "[stream]") {
  CheckRecord(Run(R"({"time":"2026-03-01T08:15:30Z","value":4})", "queue-9"), "queue-9", kT, 4);
}

TEST_CASE("payload series wins over the kafka key", "[stream]") {
  CheckRecord(Run(R"({"series":"in-payload","time":1772352930,"value":4})", "in-key"), "in-payload", kT, 4);
}

TEST_CASE("bare number payload with a key uses the broker timestamp", "[stream]") {
  CheckRecord(Run("42.5", "sensor-1", kT), "sensor-1", kT, 42.5);
  CheckRecord(Run(" -7 \n", "sensor-1", kT), "sensor-1", kT, -7);
}

TEST_CASE("bare number without a key is refused", "[stream]") {
  DecodeOptions json;
  json.format = RecordFormat::kJson;
  CHECK(Error("42.5", {}, kT, json) == "record is not a JSON object and has no key");
}

TEST_CASE("bare number without a timestamp is refused", "[stream]") {
  CHECK(Error("42.5", "sensor-1", -1) == "bare number payload has no time and the record has no timestamp");
}

TEST_CASE("bare non-numeric payload is refused", "[stream]") {
  CHECK(Error("hello", "sensor-1", kT) == "field 'value' is not a number: 'hello'");
  CHECK(Error("nan", "sensor-1", kT) == "field 'value' is not a finite number");
}

TEST_CASE("csv line decodes", "[stream]") {
  CheckRecord(Run("queue-7,2026-03-01T08:15:30Z,12.5"), "queue-7", kT, 12.5);
  CheckRecord(Run("queue-7, 1772352930 , 12.5\r"), "queue-7", kT, 12.5);
  CheckRecord(Run("queue-7,1772352930000,+3"), "queue-7", kT, 3);
}

TEST_CASE("csv quoted series may hold commas and quotes", "[stream]") {
  CheckRecord(Run(R"("north, ""east""",1772352930,1)"), "north, \"east\"", kT, 1);
}

TEST_CASE("csv with a key may omit the series", "[stream]") {
  CheckRecord(Run("1772352930,5", "queue-3"), "queue-3", kT, 5);
}

TEST_CASE("csv header and comment lines are skipped", "[stream]") {
  CHECK(Run("series,time,value").rec.skip);
  CHECK(Run("Series,Time,Value").rec.skip);
  CHECK(Run("# a comment").rec.skip);
  CHECK_FALSE(Run("queue-7,1772352930,1").rec.skip);
}

TEST_CASE("empty and blank records are refused", "[stream]") {
  CHECK(Error("") == "record is empty");
  CHECK(Error("   \t") == "record is empty");
  CHECK(Error("", "key-only", 1772352930000) == "record is empty");
}

TEST_CASE("csv with too few fields is refused", "[stream]") {
  CHECK(Error("queue-7,1772352930") == "CSV line has 2 fields, expected series,time,value");
  CHECK(Error("queue-7") == "CSV line has 1 field, expected series,time,value");
}

TEST_CASE("csv with too many fields is refused", "[stream]") {
  CHECK(Error("queue-7,1772352930,1,2") == "CSV line has more than 3 fields, expected series,time,value");
}

TEST_CASE("csv non-numeric value is refused", "[stream]") {
  CHECK(Error("queue-7,1772352930,twelve") == "field 'value' is not a number: 'twelve'");
  CHECK(Error("queue-7,1772352930,") == "field 'value' is empty");
  CHECK(Error("queue-7,1772352930,1.5.2") == "field 'value' is not a number: '1.5.2'");
}

TEST_CASE("csv non-finite value is refused", "[stream]") {
  CHECK(Error("queue-7,1772352930,inf") == "field 'value' is not a finite number");
  CHECK(Error("queue-7,1772352930,NaN") == "field 'value' is not a finite number");
  CHECK(Error("queue-7,1772352930,1e999") == "field 'value' is not a finite number");
}

TEST_CASE("csv unparseable time is refused", "[stream]") {
  CHECK(Error("queue-7,2026-02-30,1") == "time '2026-02-30' is not ISO-8601 or epoch: day 30 is not in 1..28 for 2026-02");
  CHECK(Error("queue-7,,1") == "field 'time' is empty");
}

TEST_CASE("csv unterminated quote is refused", "[stream]") {
  CHECK(Error(R"("queue-7,1772352930,1)") == "CSV line has an unterminated quote");
}

TEST_CASE("json format option refuses csv lines and csv option refuses json", "[stream]") {
  DecodeOptions json;
  json.format = RecordFormat::kJson;
  CHECK(Error("queue-7,1772352930,1", "k", kT, json) == "record is not a JSON object or number: 'queue-7,1772352930,1'");
  DecodeOptions csv;
  csv.format = RecordFormat::kCsv;
  CHECK_THAT(Error(R"({"series":"s","time":1772352930,"value":1})", {}, -1, csv), Catch::StartsWith("CSV "));
}

TEST_CASE("decoder is reusable across records and errors", "[stream]") {
  RecordDecoder d;
  DecodedRecord r;
  for (int i = 0; i < 1000; ++i) {
    const std::string ok = R"({"series":"s)" + std::to_string(i % 7) + R"(","time":1772352930,"value":)" +
                           std::to_string(i) + "}";
    REQUIRE(d.Decode({}, ok, -1, r).ok());
    CHECK(r.value == i);
    CHECK(r.series == "s" + std::to_string(i % 7));
    CHECK_FALSE(d.Decode({}, R"({"series":"s","time":1})", -1, r).ok());
  }
}

TEST_CASE("padded decoding ignores whatever follows the payload", "[stream]") {
  RecordDecoder d;
  DecodedRecord r;
  // The bytes after the payload are the next line of a block, as in FileSource buffers.
  std::string block = std::string(R"({"series":"a","time":1772352930,"value":7})") + "\n" +
                      R"("{"value":"oops" ,,,]]]})" + std::string(kRecordPadding, '"');
  const size_t len = block.find('\n');
  REQUIRE(d.DecodePadded({}, std::string_view(block.data(), len), -1, r).ok());
  CHECK(r.value == 7);
  std::string csv = "b,1772352930,8\n9999999999" + std::string(kRecordPadding, '9');
  REQUIRE(d.DecodePadded({}, std::string_view(csv.data(), csv.find('\n')), -1, r).ok());
  CHECK(r.value == 8);
  std::string bare = "8.5" + std::string(kRecordPadding, '5');
  REQUIRE(d.DecodePadded("k", std::string_view(bare.data(), 3), kT, r).ok());
  CHECK(r.value == 8.5);
}

TEST_CASE("an empty payload view with null data is refused cleanly", "[stream]") {
  // Found by decode_fuzz: a keyed record with nothing after the key reached memcpy(dst, nullptr, 0).
  RecordDecoder d;
  DecodedRecord r;
  CHECK(d.Decode("k", std::string_view(), -1, r).message() == "record is empty");
}

TEST_CASE("a malformed record gets the same reason whatever bytes follow it", "[stream]") {
  // Found by decode_fuzz: simdjson's message for this record depended on the padding bytes.
  const std::string bad = std::string(R"({"series":"s")") + "\x11" + std::string(3, '\0') + R"(me":1772352930,"F)" +
                          std::string(1, '\0') + R"(lue":1,"extra":{"a)" + "\x11" + std::string(3, '\0') + R"(,null,"x"]}})";
  RecordDecoder d;
  DecodedRecord r;
  const Status reference = d.Decode({}, bad, -1, r);
  REQUIRE_FALSE(reference.ok());
  for (char fill : std::string("}]\"x0 ")) {
    std::string block = bad + std::string(kRecordPadding, fill);
    CHECK(d.DecodePadded({}, std::string_view(block.data(), bad.size()), -1, r) == reference);
  }
}

TEST_CASE("decode options are validated", "[stream]") {
  DecodeOptions o;
  CHECK(o.Validate().ok());
  o.max_record_bytes = 0;
  CHECK(o.Validate().message() == "max_record_bytes: 0 is not in 1..1073741824");
  o = {};
  o.min_time_ms = o.max_time_ms;
  CHECK_THAT(o.Validate().message(), Catch::StartsWith("min_time:"));
  CHECK_THROWS_AS(RecordDecoder(o), std::invalid_argument);
}

}  // namespace plimsoll::stream
