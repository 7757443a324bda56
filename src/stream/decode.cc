#include "plimsoll/stream/decode.h"

#include <simdjson.h>

#include <charconv>
#include <cmath>
#include <cstring>
#include <stdexcept>

#include "plimsoll/stream/time.h"

namespace plimsoll::stream {
namespace {

static_assert(kRecordPadding >= simdjson::SIMDJSON_PADDING, "kRecordPadding must cover simdjson's read-ahead");

constexpr size_t kMaxRecordBytesLimit = size_t{1} << 30;

bool IsSpace(char c) { return c == ' ' || c == '\t' || c == '\r' || c == '\n'; }

std::string_view Trim(std::string_view s) {
  while (!s.empty() && IsSpace(s.front())) s.remove_prefix(1);
  while (!s.empty() && IsSpace(s.back())) s.remove_suffix(1);
  return s;
}

// Quotes a piece of bad input for a message, cut to a readable length.
std::string Quote(std::string_view s) {
  constexpr size_t kMax = 40;
  std::string out = "'";
  out.append(s.substr(0, kMax));
  if (s.size() > kMax) out += "...";
  out += "'";
  return out;
}

Status Bad(std::string msg) { return Status::InvalidArgument(std::move(msg)); }

Status Malformed(simdjson::error_code e) {
  return Bad(std::string("malformed JSON: ") + simdjson::error_message(e));
}

// Parses a whole field as a finite double (JSON-style number text; "nan"/"inf" refused).
Status ParseNumber(std::string_view text, std::string_view field, double& out) {
  if (text.empty()) return Bad("field '" + std::string(field) + "' is empty");
  const char* first = text.data() + (text[0] == '+' ? 1 : 0);
  auto [ptr, ec] = std::from_chars(first, text.data() + text.size(), out);
  if (ec == std::errc::result_out_of_range) return Bad("field '" + std::string(field) + "' is not a finite number");
  if (ec != std::errc() || ptr != text.data() + text.size()) {
    return Bad("field '" + std::string(field) + "' is not a number: " + Quote(text));
  }
  if (!std::isfinite(out)) return Bad("field '" + std::string(field) + "' is not a finite number");
  return Status::Ok();
}

bool EqualsIgnoreCase(std::string_view a, std::string_view b) {
  if (a.size() != b.size()) return false;
  for (size_t i = 0; i < a.size(); ++i) {
    char x = a[i] >= 'A' && a[i] <= 'Z' ? static_cast<char>(a[i] + 32) : a[i];
    if (x != b[i]) return false;
  }
  return true;
}

}  // namespace

std::string_view RecordFormatName(RecordFormat format) {
  switch (format) {
    case RecordFormat::kAuto: return "auto";
    case RecordFormat::kJson: return "json";
    case RecordFormat::kCsv: return "csv";
  }
  return "?";
}

Status DecodeOptions::Validate() const {
  if (max_record_bytes < 1 || max_record_bytes > kMaxRecordBytesLimit) {
    return Bad("max_record_bytes: " + std::to_string(max_record_bytes) + " is not in 1.." +
               std::to_string(kMaxRecordBytesLimit));
  }
  if (max_series_bytes < 1 || max_series_bytes > 65535) {
    return Bad("max_series_bytes: " + std::to_string(max_series_bytes) + " is not in 1..65535");
  }
  if (min_time_ms >= max_time_ms) {
    return Bad("min_time: " + FormatIsoTime(min_time_ms) + " is not before max_time " + FormatIsoTime(max_time_ms));
  }
  return Status::Ok();
}

struct RecordDecoder::Impl {
  simdjson::ondemand::parser parser;
  std::unique_ptr<char[]> padded;  // max_record_bytes + kRecordPadding
  std::string scratch;             // unquoted CSV fields
};

RecordDecoder::RecordDecoder(const DecodeOptions& options) : options_(options), impl_(std::make_unique<Impl>()) {
  if (Status s = options_.Validate(); !s.ok()) throw std::invalid_argument(s.message());
  if (impl_->parser.allocate(options_.max_record_bytes) != simdjson::SUCCESS) throw std::bad_alloc();
  impl_->padded = std::make_unique<char[]>(options_.max_record_bytes + kRecordPadding);
  impl_->scratch.reserve(options_.max_series_bytes + 16);
}

RecordDecoder::~RecordDecoder() = default;

Status RecordDecoder::Decode(const RawRecord& raw, DecodedRecord& out) {
  return Decode(raw.key, raw.payload, raw.timestamp_ms, out);
}

Status RecordDecoder::Decode(std::string_view key, std::string_view payload, int64_t timestamp_ms,
                             DecodedRecord& out) {
  if (payload.size() > options_.max_record_bytes) return DecodePadded(key, payload, timestamp_ms, out);
  // An empty view may have a null data(); memcpy from null is undefined even for 0 bytes.
  if (!payload.empty()) std::memcpy(impl_->padded.get(), payload.data(), payload.size());
  // Zeroed padding: simdjson's wording for malformed input depends on the bytes after it.
  std::memset(impl_->padded.get() + payload.size(), 0, kRecordPadding);
  return DecodePadded(key, std::string_view(impl_->padded.get(), payload.size()), timestamp_ms, out);
}

Status RecordDecoder::DecodePadded(std::string_view key, std::string_view payload, int64_t timestamp_ms,
                                   DecodedRecord& out) {
  out.skip = false;
  if (payload.size() > options_.max_record_bytes) {
    return Bad("record of " + std::to_string(payload.size()) + " bytes exceeds max_record_bytes " +
               std::to_string(options_.max_record_bytes));
  }
  size_t start = 0;
  while (start < payload.size() && IsSpace(payload[start])) ++start;
  // Files never hand over empty lines; an empty or blank Kafka message is a bad record.
  if (start == payload.size()) return Bad("record is empty");
  const char first = payload[start];
  if (first == '{' && options_.format != RecordFormat::kCsv) {
    Status s = DecodeJson(key, payload, timestamp_ms, out);
    // Whether a record is accepted never depends on the padding, but simdjson's message for a
    // malformed one can (found by decode_fuzz). Refused records are rare: redo them with zeroed
    // padding so a dead letter's reason is the same however the record was buffered.
    if (!s.ok() && payload.data() != impl_->padded.get()) return Decode(key, payload, timestamp_ms, out);
    return s;
  }
  if (options_.format == RecordFormat::kCsv || (options_.format == RecordFormat::kAuto && key.empty()) ||
      (options_.format == RecordFormat::kAuto && payload.find(',') != std::string_view::npos)) {
    return DecodeCsv(key, payload, timestamp_ms, out);
  }
  return DecodeBareNumber(key, payload, timestamp_ms, out);
}

Status RecordDecoder::CheckSeries(std::string_view series, bool check_utf8) const {
  if (series.empty()) return Bad("series id is empty");
  if (series.size() > options_.max_series_bytes) {
    return Bad("series id of " + std::to_string(series.size()) + " bytes exceeds max_series_bytes " +
               std::to_string(options_.max_series_bytes));
  }
  for (char c : series) {
    const auto u = static_cast<unsigned char>(c);
    if (u < 0x20 || u == 0x7f) {
      char hex[8];
      std::snprintf(hex, sizeof hex, "0x%02x", u);
      return Bad(std::string("series id contains control character ") + hex);
    }
  }
  if (check_utf8 && !simdjson::validate_utf8(series.data(), series.size())) return Bad("series id is not valid UTF-8");
  return Status::Ok();
}

Status RecordDecoder::CheckTime(int64_t time_ms) const {
  if (time_ms < options_.min_time_ms || time_ms >= options_.max_time_ms) {
    return Bad("time " + FormatIsoTime(time_ms) + " is outside the accepted window [" +
               FormatIsoTime(options_.min_time_ms) + ", " + FormatIsoTime(options_.max_time_ms) + ")");
  }
  return Status::Ok();
}

Status RecordDecoder::DecodeJson(std::string_view key, std::string_view payload, int64_t timestamp_ms,
                                 DecodedRecord& out) {
  using namespace simdjson;
  ondemand::document doc;
  if (auto e = impl_->parser.iterate(padded_string_view(payload.data(), payload.size(), payload.size() + kRecordPadding))
                   .get(doc)) {
    return Malformed(e);
  }
  ondemand::object obj;
  if (auto e = doc.get_object().get(obj)) return Malformed(e);
  bool have_series = false, have_time = false, have_value = false;
  for (auto field_result : obj) {
    ondemand::field field;
    if (auto e = std::move(field_result).get(field)) return Malformed(e);
    ondemand::raw_json_string name = field.key();
    ondemand::value v = field.value();
    if (name.unsafe_is_equal("value")) {
      if (have_value) return Bad("field 'value' appears twice");
      have_value = true;
      ondemand::json_type type;
      if (auto e = v.type().get(type)) return Malformed(e);
      if (type == ondemand::json_type::null) return Bad("field 'value' is null");
      if (type != ondemand::json_type::number) return Bad("field 'value' is not a number");
      if (v.get_double().get(out.value) != SUCCESS || !std::isfinite(out.value)) {
        return Bad("field 'value' is not a finite number");
      }
    } else if (name.unsafe_is_equal("time")) {
      if (have_time) return Bad("field 'time' appears twice");
      have_time = true;
      ondemand::json_type type;
      if (auto e = v.type().get(type)) return Malformed(e);
      if (type == ondemand::json_type::number) {
        double epoch = 0;
        if (v.get_double().get(epoch) != SUCCESS) return Bad("field 'time' is not a usable epoch number");
        Result<int64_t> ms = EpochToMillis(epoch);
        if (!ms.ok()) return Bad("field 'time' is not a usable epoch number");
        out.time_ms = *ms;
      } else if (type == ondemand::json_type::string) {
        std::string_view text;
        if (auto e = v.get_string().get(text)) return Malformed(e);
        Result<int64_t> ms = ParseTimeText(text);
        if (!ms.ok()) return ms.status();
        out.time_ms = *ms;
      } else {
        return Bad("field 'time' is not a string or number");
      }
    } else if (name.unsafe_is_equal("series")) {
      if (have_series) return Bad("field 'series' appears twice");
      have_series = true;
      ondemand::json_type type;
      if (auto e = v.type().get(type)) return Malformed(e);
      if (type != ondemand::json_type::string) return Bad("field 'series' is not a string");
      if (auto e = v.get_string().get(out.series)) return Malformed(e);
    }
  }
  // The object is fully read; anything after it is an error (ondemand stops at the object's end).
  const char* where = nullptr;
  if (doc.current_location().get(where) == SUCCESS) return Bad("malformed JSON: text after the object");
  if (!have_value) return Bad("field 'value' is missing");
  if (!have_series) {
    if (key.empty()) return Bad("field 'series' is missing and the record has no key");
    out.series = key;
  }
  PLIMSOLL_RETURN_IF_ERROR(CheckSeries(out.series, /*check_utf8=*/!have_series));
  if (!have_time) {
    if (!options_.broker_time_when_missing) return Bad("field 'time' is missing");
    if (timestamp_ms < 0) return Bad("field 'time' is missing and the record has no timestamp");
    out.time_ms = timestamp_ms;
  }
  return CheckTime(out.time_ms);
}

Status RecordDecoder::DecodeBareNumber(std::string_view key, std::string_view text, int64_t timestamp_ms,
                                       DecodedRecord& out) {
  if (key.empty()) {
    return options_.format == RecordFormat::kJson ? Bad("record is not a JSON object and has no key")
                                                  : Bad("bare number payload needs the record key as series");
  }
  text = Trim(text);
  if (options_.format == RecordFormat::kJson && text.front() != '-' && (text.front() < '0' || text.front() > '9')) {
    return Bad("record is not a JSON object or number: " + Quote(text));
  }
  PLIMSOLL_RETURN_IF_ERROR(ParseNumber(text, "value", out.value));
  PLIMSOLL_RETURN_IF_ERROR(CheckSeries(key, /*check_utf8=*/true));
  out.series = key;
  if (timestamp_ms < 0) return Bad("bare number payload has no time and the record has no timestamp");
  out.time_ms = timestamp_ms;
  return CheckTime(out.time_ms);
}

Status RecordDecoder::DecodeCsv(std::string_view key, std::string_view line, int64_t timestamp_ms,
                                DecodedRecord& out) {
  line = Trim(line);
  if (line.front() == '#') {
    out.skip = true;
    return Status::Ok();
  }
  // Splits into at most 3 fields; a quoted field ("a,b", "" for a quote) is unquoted into scratch.
  std::string_view fields[3];
  size_t count = 0;
  bool quoted_series = false;
  size_t pos = 0;
  std::string& scratch = impl_->scratch;
  while (true) {
    if (count == 3) return Bad("CSV line has more than 3 fields, expected series,time,value");
    while (pos < line.size() && (line[pos] == ' ' || line[pos] == '\t')) ++pos;
    if (pos < line.size() && line[pos] == '"') {
      if (count != 0) return Bad("CSV field " + std::to_string(count + 1) + " is quoted; only the series may be");
      scratch.clear();
      ++pos;
      while (true) {
        if (pos >= line.size()) return Bad("CSV line has an unterminated quote");
        if (line[pos] == '"') {
          if (pos + 1 < line.size() && line[pos + 1] == '"') {
            scratch += '"';
            pos += 2;
            continue;
          }
          ++pos;
          break;
        }
        scratch += line[pos++];
      }
      while (pos < line.size() && (line[pos] == ' ' || line[pos] == '\t')) ++pos;
      if (pos < line.size() && line[pos] != ',') return Bad("CSV line has text after a closing quote");
      fields[count++] = scratch;
      quoted_series = true;
    } else {
      size_t comma = line.find(',', pos);
      size_t end = comma == std::string_view::npos ? line.size() : comma;
      fields[count++] = Trim(line.substr(pos, end - pos));
      pos = end;
    }
    if (pos >= line.size()) break;
    ++pos;  // the comma
  }
  if (count == 3 && EqualsIgnoreCase(fields[0], "series") && EqualsIgnoreCase(fields[1], "time") &&
      EqualsIgnoreCase(fields[2], "value") && !quoted_series) {
    out.skip = true;
    return Status::Ok();
  }
  std::string_view series, time_text, value_text;
  if (count == 3) {
    series = fields[0];
    time_text = fields[1];
    value_text = fields[2];
  } else if (count == 2 && !key.empty() && !quoted_series) {
    series = key;
    time_text = fields[0];
    value_text = fields[1];
  } else {
    return Bad("CSV line has " + std::to_string(count) + " field" + (count == 1 ? "" : "s") +
               ", expected series,time,value" + (key.empty() ? "" : " or time,value"));
  }
  PLIMSOLL_RETURN_IF_ERROR(CheckSeries(series, /*check_utf8=*/true));
  PLIMSOLL_RETURN_IF_ERROR(ParseNumber(value_text, "value", out.value));
  if (time_text.empty()) {
    if (!options_.broker_time_when_missing) return Bad("field 'time' is empty");
    if (timestamp_ms < 0) return Bad("field 'time' is empty and the record has no timestamp");
    out.time_ms = timestamp_ms;
  } else {
    Result<int64_t> ms = ParseTimeText(time_text);
    if (!ms.ok()) return ms.status();
    out.time_ms = *ms;
  }
  out.series = series;
  return CheckTime(out.time_ms);
}

}  // namespace plimsoll::stream
