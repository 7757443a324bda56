#pragma once
// RecordDecoder: turns one raw record (JSON object, bare number with a key, or CSV line) into a
// series id, a time and a value. This is the first step of the hot path; a decoder is reused for
// every record so that decoding allocates nothing after construction.
//
// Record forms (see /work/notes/stream-input-docs.md for the full rules):
//   JSON   {"series": "queue-7", "time": "2026-03-01T08:15:00Z" | 1772352900 | 1772352900000, "value": 12.5}
//          other fields are ignored; without "series" the record key (Kafka) is the series id.
//   number 12.5 (payload) with the series in the record key; time is the broker timestamp.
//   CSV    queue-7,2026-03-01T08:15:00Z,12.5   (or time,value with the series in the key);
//          fields may be double-quoted ("a,b" with "" for a quote); a header line
//          series,time,value and '#' comment lines are skipped, not errors.
//   An empty or blank record is an error ("record is empty"); file sources drop empty lines.
//
// Thread-safety: a decoder is used by one thread at a time (it owns a parser and a scratch buffer).

#include <cstddef>
#include <cstdint>
#include <memory>
#include <string>
#include <string_view>

#include "plimsoll/base/status.h"
#include "plimsoll/stream/source.h"

namespace plimsoll::stream {

// Bytes that must be readable after a payload passed to DecodePadded (simdjson reads ahead).
inline constexpr size_t kRecordPadding = 64;

enum class RecordFormat : uint8_t {
  kAuto = 0,  // '{' -> JSON object; a number with a key -> bare number; anything else -> CSV
  kJson = 1,  // JSON object or bare number; CSV lines are errors
  kCsv = 2,   // CSV only
};

// Returns "auto", "json" or "csv".
std::string_view RecordFormatName(RecordFormat format);

struct DecodeOptions {
  RecordFormat format = RecordFormat::kAuto;
  // Larger records are refused before parsing. Bounds memory per record and dead-letter size.
  size_t max_record_bytes = 65536;
  // Longest accepted series id in bytes; ids are stored per series and in every flag row.
  size_t max_series_bytes = 200;
  // Accepted record times, [min_time_ms, max_time_ms). Default 1970-01-01 .. 2200-01-01 (UTC):
  // catches epoch numbers in the wrong unit and garbled dates without refusing real history.
  int64_t min_time_ms = 0;
  int64_t max_time_ms = 7'258'118'400'000;
  // When a JSON object or CSV line has no time, use the record's broker timestamp instead of
  // refusing it. Bare-number payloads always use the broker timestamp.
  bool broker_time_when_missing = false;

  // OK when usable; otherwise names the field, e.g. "max_record_bytes: 0 is not in 1..1073741824".
  Status Validate() const;
};

// One decoded observation.
struct DecodedRecord {
  // Series id. Points into the decoder (valid until its next Decode call) or into the raw record
  // (valid while that record's buffer is); copy it to keep it.
  std::string_view series;
  int64_t time_ms = 0;  // epoch milliseconds, UTC, inside the options' time window
  double value = 0;     // finite
  // True for lines that carry no observation (CSV header, '#' comment); the other fields are
  // then unset. Such lines are neither records nor errors.
  bool skip = false;
};

class RecordDecoder {
 public:
  // REQUIRES: options.Validate().ok(). Allocates the parser and a padded scratch buffer of
  // max_record_bytes + kRecordPadding; throws std::invalid_argument on invalid options and
  // std::bad_alloc when the parser cannot allocate (start-up only).
  explicit RecordDecoder(const DecodeOptions& options = {});
  ~RecordDecoder();
  RecordDecoder(const RecordDecoder&) = delete;
  RecordDecoder& operator=(const RecordDecoder&) = delete;

  // Decodes `raw` (key, payload, timestamp_ms), copying the payload into the decoder's padded
  // buffer (about 5 ns for 60 bytes) so any source's views are safe. On failure returns
  // InvalidArgument naming what is wrong ("field 'value' is not a number"), leaving `out`
  // unspecified. Never throws.
  Status Decode(const RawRecord& raw, DecodedRecord& out);
  Status Decode(std::string_view key, std::string_view payload, int64_t timestamp_ms, DecodedRecord& out);

  // As Decode without the copy. REQUIRES: kRecordPadding bytes after payload's end are readable
  // (their content does not matter); FileSource and StdinSource records satisfy this.
  Status DecodePadded(std::string_view key, std::string_view payload, int64_t timestamp_ms, DecodedRecord& out);

  const DecodeOptions& options() const { return options_; }

 private:
  struct Impl;
  Status DecodeJson(std::string_view key, std::string_view payload, int64_t timestamp_ms, DecodedRecord& out);
  Status DecodeCsv(std::string_view key, std::string_view line, int64_t timestamp_ms, DecodedRecord& out);
  Status DecodeBareNumber(std::string_view key, std::string_view text, int64_t timestamp_ms, DecodedRecord& out);
  Status CheckSeries(std::string_view series, bool check_utf8) const;
  Status CheckTime(int64_t time_ms) const;

  DecodeOptions options_;
  std::unique_ptr<Impl> impl_;
};

}  // namespace plimsoll::stream
