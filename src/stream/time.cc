#include "plimsoll/stream/time.h"

#include <charconv>
#include <cmath>
#include <cstdio>

namespace plimsoll::stream {
namespace {

bool IsDigit(char c) { return c >= '0' && c <= '9'; }

// Reads exactly `n` digits at text[pos]; returns -1 when they are not all digits.
int ReadDigits(std::string_view text, size_t pos, size_t n) {
  if (pos + n > text.size()) return -1;
  int v = 0;
  for (size_t i = 0; i < n; ++i) {
    char c = text[pos + i];
    if (!IsDigit(c)) return -1;
    v = v * 10 + (c - '0');
  }
  return v;
}

bool IsLeap(int64_t y) { return (y % 4 == 0 && y % 100 != 0) || y % 400 == 0; }

int DaysInMonth(int64_t y, int m) {
  static constexpr int kDays[] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
  return m == 2 && IsLeap(y) ? 29 : kDays[m - 1];
}

Status Bad(std::string why) { return Status::InvalidArgument(std::move(why)); }

}  // namespace

// Howard Hinnant's days_from_civil: exact for the proleptic Gregorian calendar.
int64_t DaysFromCivil(int64_t y, int m, int d) {
  y -= m <= 2;
  const int64_t era = (y >= 0 ? y : y - 399) / 400;
  const int64_t yoe = y - era * 400;
  const int64_t doy = (153 * (m + (m > 2 ? -3 : 9)) + 2) / 5 + d - 1;
  const int64_t doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
  return era * 146097 + doe - 719468;
}

Result<int64_t> ParseIsoTime(std::string_view s) {
  // Date: YYYY-MM-DD (four-digit years only: 0000..9999).
  const int year = ReadDigits(s, 0, 4);
  if (year < 0 || s.size() < 10 || s[4] != '-' || s[7] != '-') return Bad("expected YYYY-MM-DD at the start");
  const int month = ReadDigits(s, 5, 2);
  const int day = ReadDigits(s, 8, 2);
  if (month < 0 || day < 0) return Bad("expected YYYY-MM-DD at the start");
  if (month < 1 || month > 12) return Bad("month " + std::to_string(month) + " is not in 1..12");
  if (day < 1 || day > DaysInMonth(year, month)) {
    return Bad("day " + std::to_string(day) + " is not in 1.." + std::to_string(DaysInMonth(year, month)) +
               " for " + std::string(s.substr(0, 7)));
  }
  int64_t ms = DaysFromCivil(year, month, day) * 86'400'000;
  size_t pos = 10;
  if (pos == s.size()) return ms;
  if (s[pos] != 'T' && s[pos] != 't' && s[pos] != ' ') return Bad("expected 'T' after the date");
  ++pos;
  const int hour = ReadDigits(s, pos, 2);
  if (hour < 0 || pos + 5 > s.size() || s[pos + 2] != ':') return Bad("expected hh:mm after 'T'");
  const int minute = ReadDigits(s, pos + 3, 2);
  if (minute < 0) return Bad("expected hh:mm after 'T'");
  if (hour > 23) return Bad("hour " + std::to_string(hour) + " is not in 0..23");
  if (minute > 59) return Bad("minute " + std::to_string(minute) + " is not in 0..59");
  pos += 5;
  int second = 0;
  int millis = 0;
  if (pos < s.size() && s[pos] == ':') {
    second = ReadDigits(s, pos + 1, 2);
    if (second < 0) return Bad("expected two-digit seconds after hh:mm:");
    if (second == 60) return Bad("leap second 60 is not supported");
    if (second > 59) return Bad("second " + std::to_string(second) + " is not in 0..59");
    pos += 3;
    if (pos < s.size() && (s[pos] == '.' || s[pos] == ',')) {
      ++pos;
      size_t digits = 0;
      while (pos < s.size() && IsDigit(s[pos])) {
        if (digits < 3) millis = millis * 10 + (s[pos] - '0');
        ++digits;
        ++pos;
      }
      if (digits == 0) return Bad("expected digits after the decimal mark");
      for (size_t i = digits; i < 3; ++i) millis *= 10;
    }
  }
  ms += (hour * 3600LL + minute * 60LL + second) * 1000 + millis;
  if (pos == s.size()) return ms;
  const char zone = s[pos];
  if (zone == 'Z' || zone == 'z') {
    if (pos + 1 != s.size()) return Bad("unexpected text after 'Z'");
    return ms;
  }
  if (zone != '+' && zone != '-') return Bad("unexpected '" + std::string(1, zone) + "' after the time");
  // Offsets: +hh, +hh:mm, +hhmm.
  const int oh = ReadDigits(s, pos + 1, 2);
  if (oh < 0) return Bad("offset must be +hh, +hh:mm or +hhmm");
  int om = 0;
  size_t end = pos + 3;
  if (end < s.size()) {
    if (s[end] == ':') ++end;
    om = ReadDigits(s, end, 2);
    if (om < 0) return Bad("offset must be +hh, +hh:mm or +hhmm");
    end += 2;
  }
  if (end != s.size()) return Bad("unexpected text after the offset");
  if (oh > 23 || om > 59) return Bad("offset " + std::string(s.substr(pos)) + " is out of range");
  const int64_t offset_ms = (oh * 60LL + om) * 60'000;
  // Local time = UTC + offset, so UTC = local - offset.
  return zone == '+' ? ms - offset_ms : ms + offset_ms;
}

Result<int64_t> EpochToMillis(double epoch) {
  if (!std::isfinite(epoch) || std::fabs(epoch) > 1e16) return Bad("epoch number is out of range");
  const double ms = std::fabs(epoch) >= kEpochMillisThreshold ? epoch : epoch * 1000.0;
  return static_cast<int64_t>(std::floor(ms));
}

Result<int64_t> ParseTimeText(std::string_view text) {
  auto fail = [&](std::string_view why) {
    return Status::InvalidArgument("time '" + std::string(text.substr(0, 64)) + "' is not ISO-8601 or epoch: " +
                                   std::string(why));
  };
  if (text.empty()) return fail("empty");
  // An epoch number contains only digits, one sign, a decimal point or an exponent, and has no
  // '-' after its first character (which every ISO date has at index 4).
  const bool looks_numeric = text.size() < 5 || text.find_first_of("-:T", 1) == std::string_view::npos;
  if (looks_numeric) {
    double v = 0;
    const char* first = text.data() + (text[0] == '+' ? 1 : 0);
    auto [ptr, ec] = std::from_chars(first, text.data() + text.size(), v);
    if (ec != std::errc() || ptr != text.data() + text.size()) return fail("not a number");
    Result<int64_t> ms = EpochToMillis(v);
    if (!ms.ok()) return fail(ms.status().message());
    return ms;
  }
  Result<int64_t> ms = ParseIsoTime(text);
  if (!ms.ok()) return fail(ms.status().message());
  return ms;
}

std::string FormatIsoTime(int64_t epoch_ms) {
  int64_t days = epoch_ms >= 0 ? epoch_ms / 86'400'000 : -((-epoch_ms + 86'399'999) / 86'400'000);
  int64_t rem = epoch_ms - days * 86'400'000;
  // civil_from_days (Hinnant).
  days += 719468;
  const int64_t era = (days >= 0 ? days : days - 146096) / 146097;
  const int64_t doe = days - era * 146097;
  const int64_t yoe = (doe - doe / 1460 + doe / 36524 - doe / 146096) / 365;
  const int64_t doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
  const int64_t mp = (5 * doy + 2) / 153;
  const int64_t d = doy - (153 * mp + 2) / 5 + 1;
  const int64_t m = mp < 10 ? mp + 3 : mp - 9;
  const int64_t y = yoe + era * 400 + (m <= 2);
  const int64_t ms = rem % 1000;
  rem /= 1000;
  char buf[64];
  int n = std::snprintf(buf, sizeof buf, "%04lld-%02lld-%02lldT%02lld:%02lld:%02lld", static_cast<long long>(y),
                        static_cast<long long>(m), static_cast<long long>(d), static_cast<long long>(rem / 3600),
                        static_cast<long long>(rem / 60 % 60), static_cast<long long>(rem % 60));
  std::string out(buf, static_cast<size_t>(n));
  if (ms != 0) {
    std::snprintf(buf, sizeof buf, ".%03lld", static_cast<long long>(ms));
    out += buf;
  }
  out += 'Z';
  return out;
}

Result<std::optional<int64_t>> ParseDuration(std::string_view text) {
  const std::string quoted = "duration '" + std::string(text.substr(0, 64)) + "'";
  if (text == "none") return std::optional<int64_t>();
  if (text == "0") return std::optional<int64_t>(0);
  if (text.empty()) return Bad(quoted + " is empty (use e.g. 15m, 1h, 30s, 1d or none)");
  int64_t total = 0;
  size_t pos = 0;
  while (pos < text.size()) {
    int64_t n = 0;
    auto [ptr, ec] = std::from_chars(text.data() + pos, text.data() + text.size(), n);
    if (ec != std::errc() || n < 0 || text[pos] == '+' || text[pos] == '-') {
      return Bad(quoted + " must be <integer><unit> pairs such as 15m, 1h30m or none");
    }
    pos = static_cast<size_t>(ptr - text.data());
    size_t unit_end = pos;
    while (unit_end < text.size() && !IsDigit(text[unit_end])) ++unit_end;
    const std::string_view unit = text.substr(pos, unit_end - pos);
    int64_t scale = 0;
    if (unit == "ms") scale = 1;
    else if (unit == "s") scale = 1000;
    else if (unit == "m") scale = 60'000;
    else if (unit == "h") scale = 3'600'000;
    else if (unit == "d") scale = 86'400'000;
    else if (unit == "w") scale = 7 * 86'400'000LL;
    if (unit.empty()) return Bad(quoted + " lacks a unit (use ms, s, m, h, d, w)");
    if (scale == 0) return Bad(quoted + " has unknown unit '" + std::string(unit) + "' (use ms, s, m, h, d, w)");
    if (n > (int64_t{1} << 53) / scale || total > (int64_t{1} << 53)) return Bad(quoted + " is too long");
    total += n * scale;
    pos = unit_end;
  }
  return std::optional<int64_t>(total);
}

std::string FormatDuration(int64_t ms) {
  if (ms == 0) return "0s";
  static constexpr std::pair<int64_t, const char*> kUnits[] = {
      {7 * 86'400'000LL, "w"}, {86'400'000, "d"}, {3'600'000, "h"}, {60'000, "m"}, {1000, "s"}, {1, "ms"}};
  std::string out;
  for (auto [scale, name] : kUnits) {
    if (ms >= scale) {
      out += std::to_string(ms / scale) + name;
      ms %= scale;
    }
  }
  return out;
}

}  // namespace plimsoll::stream
