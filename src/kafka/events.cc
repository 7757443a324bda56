#include "plimsoll/kafka/events.h"

#include <cstdio>
#include <ctime>

#include "plimsoll/base/json_writer.h"

namespace plimsoll::kafka {
namespace {

std::string SeriesStepId(std::string_view series, int64_t step, std::string_view suffix) {
  std::string id(series);
  id += '@';
  id += std::to_string(step);
  id += suffix;
  return id;
}

void NumberOrNull(JsonWriter& w, std::string_view key, double value) {
  w.Key(key);
  if (std::isfinite(value)) {
    w.Number(value);
  } else {
    w.Null();
  }
}

}  // namespace

std::string Base64(std::string_view bytes) {
  static constexpr char kAlphabet[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
  std::string out;
  out.reserve((bytes.size() + 2) / 3 * 4);
  size_t i = 0;
  for (; i + 2 < bytes.size(); i += 3) {
    uint32_t n = (static_cast<uint8_t>(bytes[i]) << 16) | (static_cast<uint8_t>(bytes[i + 1]) << 8) |
                 static_cast<uint8_t>(bytes[i + 2]);
    out += kAlphabet[(n >> 18) & 63];
    out += kAlphabet[(n >> 12) & 63];
    out += kAlphabet[(n >> 6) & 63];
    out += kAlphabet[n & 63];
  }
  if (i + 1 == bytes.size()) {
    uint32_t n = static_cast<uint8_t>(bytes[i]) << 16;
    out += kAlphabet[(n >> 18) & 63];
    out += kAlphabet[(n >> 12) & 63];
    out += "==";
  } else if (i + 2 == bytes.size()) {
    uint32_t n = (static_cast<uint8_t>(bytes[i]) << 16) | (static_cast<uint8_t>(bytes[i + 1]) << 8);
    out += kAlphabet[(n >> 18) & 63];
    out += kAlphabet[(n >> 12) & 63];
    out += kAlphabet[(n >> 6) & 63];
    out += '=';
  }
  return out;
}

std::string IsoTimeMillis(int64_t time_ms) {
  int64_t seconds = time_ms / 1000;
  int64_t millis = time_ms % 1000;
  if (millis < 0) {
    millis += 1000;
    seconds -= 1;
  }
  std::time_t t = static_cast<std::time_t>(seconds);
  std::tm tm{};
  gmtime_r(&t, &tm);
  char buf[80];
  std::snprintf(buf, sizeof(buf), "%04d-%02d-%02dT%02d:%02d:%02d.%03dZ", tm.tm_year + 1900, tm.tm_mon + 1,
                tm.tm_mday, tm.tm_hour, tm.tm_min, tm.tm_sec, static_cast<int>(millis));
  return buf;
}

std::string EncodeFlag(const FlagEvent& e) {
  JsonWriter w;
  w.BeginObject().Field("kind", "flag").Field("id", SeriesStepId(e.series, e.step, ""));
  w.Field("series", e.series).Field("step", e.step).Field("time", IsoTimeMillis(e.time_ms));
  NumberOrNull(w, "value", e.value);
  NumberOrNull(w, "expected", e.expected);
  NumberOrNull(w, "low", e.low);
  NumberOrNull(w, "high", e.high);
  NumberOrNull(w, "level", e.level);
  w.Field("side", e.value > e.high ? "above" : "below").Field("form", e.form);
  w.EndObject();
  return w.Take();
}

std::string EncodeAlert(const AlertEvent& e) {
  std::string_view state = e.raised ? "raised" : "cleared";
  JsonWriter w;
  w.BeginObject().Field("kind", "alert").Field("id", SeriesStepId(e.series, e.step, std::string(":") + std::string(state)));
  w.Field("series", e.series).Field("state", state).Field("step", e.step).Field("time", IsoTimeMillis(e.time_ms));
  w.Field("breaches", e.breaches).Field("window", e.window);
  NumberOrNull(w, "value", e.value);
  NumberOrNull(w, "expected", e.expected);
  w.EndObject();
  return w.Take();
}

std::string EncodeModelChange(const ModelChangeEvent& e) {
  JsonWriter w;
  w.BeginObject().Field("kind", "model_change").Field("id", SeriesStepId(e.series, e.step, ":form"));
  w.Field("series", e.series).Field("step", e.step).Field("form", e.form);
  w.Key("previous_form");
  if (e.previous_form.empty()) {
    w.Null();
  } else {
    w.String(e.previous_form);
  }
  w.Field("reason", e.reason);
  NumberOrNull(w, "aicc", e.aicc);
  NumberOrNull(w, "alpha", e.alpha);
  NumberOrNull(w, "beta", e.beta);
  NumberOrNull(w, "gamma", e.gamma);
  NumberOrNull(w, "phi", e.phi);
  w.EndObject();
  return w.Take();
}

std::string EncodeDeadLetter(const DeadLetterEvent& e) {
  std::string id(e.stream);
  id += ':';
  id += std::to_string(e.partition);
  id += ':';
  id += std::to_string(e.offset);
  bool truncated = e.payload.size() > kDeadLetterPayloadLimit;
  JsonWriter w;
  w.BeginObject().Field("kind", "dead_letter").Field("id", id);
  w.Field("stream", e.stream).Field("partition", e.partition).Field("offset", e.offset);
  w.Field("code", StatusCodeName(e.code)).Field("reason", e.reason);
  w.Field("key_base64", Base64(e.key));
  w.Field("payload_base64", Base64(e.payload.substr(0, kDeadLetterPayloadLimit)));
  w.Field("payload_bytes", static_cast<int64_t>(e.payload.size())).Field("truncated", truncated);
  w.EndObject();
  return w.Take();
}

}  // namespace plimsoll::kafka
