#pragma once
// Time parsing for records and configuration, without locale or time-zone database.
//
// Record times are ISO-8601 strings or Unix epoch numbers (seconds or milliseconds); every time
// is carried as int64 milliseconds since 1970-01-01T00:00:00Z. Durations in the config are
// strings such as "15m", "1h30m" or "none".
//
// Thread-safety: pure functions; callable from any thread.

#include <cstdint>
#include <optional>
#include <string>
#include <string_view>

#include "plimsoll/base/status.h"

namespace plimsoll::stream {

// Epoch numbers whose magnitude is at least this are milliseconds, smaller ones seconds.
// 1e11 seconds is the year 5138; 1e11 milliseconds is 1973-03-03, so millisecond times before
// March 1973 are misread as seconds (and then rejected by the default time window).
inline constexpr double kEpochMillisThreshold = 1e11;

// Days since 1970-01-01 of a proleptic Gregorian date. REQUIRES: 1 <= month <= 12, 1 <= day <= 31.
int64_t DaysFromCivil(int64_t year, int month, int day);

// Parses an ISO-8601 date or date-time into epoch milliseconds:
//   2026-03-01 | 2026-03-01T08:15 | 2026-03-01T08:15:30 | ...:30.25 | ...Z | ...+02:00 | ...-0530
// 'T', 't' or one space separates date and time; no offset means UTC; fractional seconds beyond
// milliseconds are truncated toward the earlier instant; leap seconds (:60) are refused.
// Fails (InvalidArgument) with the reason, e.g. "month 13 is not in 1..12"; never throws.
Result<int64_t> ParseIsoTime(std::string_view text);

// Converts an epoch number to milliseconds using kEpochMillisThreshold; fractions of a
// millisecond are truncated toward the earlier instant. Fails when not finite or beyond +-1e16.
Result<int64_t> EpochToMillis(double epoch);

// Parses a record time field given as text: an epoch number ("1767225600", "1767225600123",
// "1767225600.5") or an ISO-8601 date-time. Fails with "time '<text>' is not ISO-8601 or epoch: <why>".
Result<int64_t> ParseTimeText(std::string_view text);

// Formats epoch milliseconds as "2026-03-01T08:15:30.250Z" (milliseconds only when non-zero).
std::string FormatIsoTime(int64_t epoch_ms);

// Parses a duration: one or more <integer><unit> pairs, unit ms|s|m|h|d|w ("15m", "1h30m",
// "500ms"), or "0" for zero. Returns milliseconds; nullopt for "none" (no limit / no interval).
// Fails naming the problem, e.g. "duration '15x' has unknown unit 'x' (use ms, s, m, h, d, w)".
Result<std::optional<int64_t>> ParseDuration(std::string_view text);

// Formats milliseconds as the shortest duration text ParseDuration reads back ("1h30m", "0s").
std::string FormatDuration(int64_t ms);

}  // namespace plimsoll::stream
