// JSON encodings of sink events.
#include <catch2/catch.hpp>

#include "plimsoll/kafka/events.h"

namespace plimsoll::kafka {
namespace {

TEST_CASE("base64 follows the RFC 4648 test vectors", "[kafka]") {
  // RFC 4648 section 10, "Test Vectors".
  CHECK(Base64("") == "");
  CHECK(Base64("f") == "Zg==");
  CHECK(Base64("fo") == "Zm8=");
  CHECK(Base64("foo") == "Zm9v");
  CHECK(Base64("foob") == "Zm9vYg==");
  CHECK(Base64("fooba") == "Zm9vYmE=");
  CHECK(Base64("foobar") == "Zm9vYmFy");
  CHECK(Base64(std::string("\x00\xff", 2)) == "AP8=");
}

TEST_CASE("event times are ISO-8601 UTC with milliseconds", "[kafka]") {
  CHECK(IsoTimeMillis(0) == "1970-01-01T00:00:00.000Z");
  CHECK(IsoTimeMillis(1'700'000'000'123) == "2023-11-14T22:13:20.123Z");  // from `date -u -d @1700000000`
  CHECK(IsoTimeMillis(-1) == "1969-12-31T23:59:59.999Z");
}

TEST_CASE("a flag event carries a deterministic id and the band it crossed", "[kafka]") {
  FlagEvent e{"queue-7", 42, 1'700'000'000'000, 130.5, 100, 80, 120, 0.95, "ETS(A,Ad,A)"};
  CHECK(EncodeFlag(e) ==
        "{\"kind\":\"flag\",\"id\":\"queue-7@42\",\"series\":\"queue-7\",\"step\":42,"
        "\"time\":\"2023-11-14T22:13:20.000Z\",\"value\":130.5,\"expected\":100,\"low\":80,\"high\":120,"
        "\"level\":0.95,\"side\":\"above\",\"form\":\"ETS(A,Ad,A)\"}");
}

TEST_CASE("alert and model change events name their state and null what is absent", "[kafka]") {
  AlertEvent a{"s", false, 9, 0, 3, 5, 1.5, 2};
  CHECK(EncodeAlert(a) ==
        "{\"kind\":\"alert\",\"id\":\"s@9:cleared\",\"series\":\"s\",\"state\":\"cleared\",\"step\":9,"
        "\"time\":\"1970-01-01T00:00:00.000Z\",\"breaches\":3,\"window\":5,\"value\":1.5,\"expected\":2}");
  ModelChangeEvent m{"s", 10, "ETS(A,N,N)", "", "warmup", 12.5, 0.3};
  CHECK(EncodeModelChange(m) ==
        "{\"kind\":\"model_change\",\"id\":\"s@10:form\",\"series\":\"s\",\"step\":10,\"form\":\"ETS(A,N,N)\","
        "\"previous_form\":null,\"reason\":\"warmup\",\"aicc\":12.5,\"alpha\":0.3,\"beta\":null,\"gamma\":null,"
        "\"phi\":null}");
  ModelChangeEvent refit{"s", 400, "ETS(A,Ad,N)", "ETS(A,N,N)", "refit: alert", 30.25, 0.5, 0.1, NAN, 0.9};
  CHECK(EncodeModelChange(refit) ==
        "{\"kind\":\"model_change\",\"id\":\"s@400:form\",\"series\":\"s\",\"step\":400,"
        "\"form\":\"ETS(A,Ad,N)\",\"previous_form\":\"ETS(A,N,N)\",\"reason\":\"refit: alert\",\"aicc\":30.25,"
        "\"alpha\":0.5,\"beta\":0.1,\"gamma\":null,\"phi\":0.9}");
}

TEST_CASE("dead letters keep binary payloads intact and mark truncation", "[kafka]") {
  DeadLetterEvent d{"kafka:calls", 3, 17, StatusCode::kInvalidArgument, "value is not a number",
                    "k", std::string_view("\x00\x01", 2)};
  CHECK(EncodeDeadLetter(d) ==
        "{\"kind\":\"dead_letter\",\"id\":\"kafka:calls:3:17\",\"stream\":\"kafka:calls\",\"partition\":3,"
        "\"offset\":17,\"code\":\"invalid argument\",\"reason\":\"value is not a number\",\"key_base64\":\"aw==\","
        "\"payload_base64\":\"AAE=\",\"payload_bytes\":2,\"truncated\":false}");
  std::string huge(kDeadLetterPayloadLimit + 10, 'x');
  d.payload = huge;
  std::string json = EncodeDeadLetter(d);
  CHECK(json.find("\"payload_bytes\":" + std::to_string(huge.size())) != std::string::npos);
  CHECK(json.find("\"truncated\":true") != std::string::npos);
}

}  // namespace
}  // namespace plimsoll::kafka
