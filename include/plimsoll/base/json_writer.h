#pragma once
// JsonWriter: a small streaming writer for the JSON that plimsoll prints (CLI --json, benchmark
// reports, HTTP bodies, Kafka events). Doubles are written in shortest round-trip form; NaN and
// infinities become null, since JSON has no spelling for them.
//
// Usage: w.BeginObject(); w.Key("a"); w.Number(1.5); w.EndObject(); std::string s = w.Take();
// REQUIRES: calls nest correctly (every Begin has its End; a Key precedes each object member).
// Thread-safety: none; one writer per thread.

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

namespace plimsoll {

class JsonWriter {
 public:
  JsonWriter& BeginObject();
  JsonWriter& EndObject();
  JsonWriter& BeginArray();
  JsonWriter& EndArray();
  JsonWriter& Key(std::string_view key);
  JsonWriter& String(std::string_view value);
  JsonWriter& Number(double value);
  JsonWriter& Integer(int64_t value);
  JsonWriter& Bool(bool value);
  JsonWriter& Null();

  // Shorthands for an object member.
  JsonWriter& Field(std::string_view key, std::string_view value) { return Key(key).String(value); }
  JsonWriter& Field(std::string_view key, const char* value) { return Key(key).String(value); }
  JsonWriter& Field(std::string_view key, double value) { return Key(key).Number(value); }
  JsonWriter& Field(std::string_view key, int64_t value) { return Key(key).Integer(value); }
  JsonWriter& Field(std::string_view key, int value) { return Key(key).Integer(value); }
  JsonWriter& Field(std::string_view key, bool value) { return Key(key).Bool(value); }

  const std::string& str() const { return out_; }
  std::string Take() { return std::move(out_); }

 private:
  void BeforeValue();
  std::string out_;
  std::vector<bool> first_in_scope_;  // one entry per open object/array
  bool after_key_ = false;
};

// Appends `value` to `out` as a quoted, escaped JSON string.
void AppendJsonString(std::string& out, std::string_view value);

// Shortest text that parses back to exactly `value` ("1.5", "1e-09"); "null" when not finite.
std::string FormatJsonNumber(double value);

}  // namespace plimsoll
