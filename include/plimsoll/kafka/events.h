#pragma once
// JSON encodings of the events KafkaSink publishes (schemas in the kafka docs). Every event has
// "kind" and a deterministic "id", so readers of at-least-once topics can drop repeats.
// Times are ISO-8601 UTC with milliseconds ("2026-12-02T01:04:05.123Z").
//
// Thread-safety: pure functions; the event structs only borrow their strings.

#include <cmath>
#include <cstdint>
#include <string>
#include <string_view>

#include "plimsoll/base/status.h"

namespace plimsoll::kafka {

struct FlagEvent {
  std::string_view series;
  int64_t step = 0;        // interval index of the observation
  int64_t time_ms = 0;     // observation time, ms since the epoch
  double value = 0;        // observed
  double expected = 0;     // one-step forecast mean
  double low = 0, high = 0;  // prediction interval
  double level = 0.95;     // interval coverage
  std::string_view form;   // e.g. "ETS(A,Ad,A)"
};

struct AlertEvent {
  std::string_view series;
  bool raised = true;      // false: cleared
  int64_t step = 0;
  int64_t time_ms = 0;
  int breaches = 0;        // breaches within the window that decided it
  int window = 0;
  double value = 0;
  double expected = 0;
};

struct ModelChangeEvent {
  std::string_view series;
  int64_t step = 0;
  std::string_view form;
  std::string_view previous_form;  // empty: first model (null)
  std::string_view reason;         // "warmup", "refit: <trigger>", ...
  double aicc = NAN;
  double alpha = NAN, beta = NAN, gamma = NAN, phi = NAN;  // NaN: not in the form (null)
};

struct DeadLetterEvent {
  std::string_view stream;  // "kafka:calls", "file:/x.csv", "stdin"
  int32_t partition = 0;
  int64_t offset = 0;
  StatusCode code = StatusCode::kInvalidArgument;
  std::string_view reason;
  std::string_view key;      // raw bytes
  std::string_view payload;  // raw bytes; at most kDeadLetterPayloadLimit are kept
};

inline constexpr size_t kDeadLetterPayloadLimit = 64 * 1024;

// {"kind":"flag","id":"<series>@<step>",...}; non-finite numbers become null.
std::string EncodeFlag(const FlagEvent& event);
// {"kind":"alert","id":"<series>@<step>:raised|cleared",...}
std::string EncodeAlert(const AlertEvent& event);
// {"kind":"model_change","id":"<series>@<step>:form",...}
std::string EncodeModelChange(const ModelChangeEvent& event);
// {"kind":"dead_letter","id":"<stream>:<partition>:<offset>",...}; key and payload base64-encoded
// (binary survives), payload cut at kDeadLetterPayloadLimit with "truncated":true.
std::string EncodeDeadLetter(const DeadLetterEvent& event);

// Standard base64 (RFC 4648, with padding).
std::string Base64(std::string_view bytes);
// "2026-12-02T01:04:05.123Z" for milliseconds since the epoch (UTC; negative allowed).
std::string IsoTimeMillis(int64_t time_ms);

}  // namespace plimsoll::kafka
