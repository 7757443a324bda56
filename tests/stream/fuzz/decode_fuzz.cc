// libFuzzer target for the record decoder and the time parsers (see run_fuzz.sh).
//
// Input layout: byte 0 selects options (bits 0-1 format auto/json/csv/auto, bit 2 the text up to
// the first '\n' is the record key, bit 3 broker_time_when_missing, bit 4 timestamp absent);
// the rest is the payload. Checks, beyond "no crash, no sanitizer report":
//  - accepted records satisfy the documented guarantees (series non-empty and within the limit,
//    finite value, time inside the window);
//  - DecodePadded on the payload followed by arbitrary padding bytes gives exactly what the
//    copying Decode gives (the in-place path never reads meaning from the padding);
//  - ParseIsoTime round-trips through FormatIsoTime; ParseDuration through FormatDuration.

#include <cmath>
#include <cstdint>
#include <cstring>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "plimsoll/stream/decode.h"
#include "plimsoll/stream/time.h"
#include "stream/fuzz/fuzz_check.h"

namespace plimsoll::stream::fuzz {

inline int DecodeOne(const uint8_t* data, size_t size) {
  if (size == 0) return 0;
  const uint8_t mode = data[0];
  std::string_view rest(reinterpret_cast<const char*>(data) + 1, size - 1);
  DecodeOptions opt;
  opt.format = static_cast<RecordFormat>((mode & 3) == 3 ? 0 : (mode & 3));
  opt.broker_time_when_missing = (mode & 8) != 0;
  opt.max_record_bytes = 4096;
  opt.max_series_bytes = 64;
  const int64_t timestamp = (mode & 16) ? -1 : 1'772'352'930'000;
  std::string_view key;
  if ((mode & 4) != 0) {
    const size_t nl = rest.find('\n');
    key = rest.substr(0, nl);
    rest = nl == std::string_view::npos ? std::string_view() : rest.substr(nl + 1);
  }

  // One reused decoder per option set, as on the hot path (state must not leak between records).
  static std::unique_ptr<RecordDecoder> decoders[6];
  std::unique_ptr<RecordDecoder>& decoder = decoders[static_cast<int>(opt.format) * 2 + (opt.broker_time_when_missing ? 1 : 0)];
  if (!decoder) decoder = std::make_unique<RecordDecoder>(opt);
  DecodedRecord a;
  const Status sa = decoder->Decode(key, rest, timestamp, a);
  const std::string series_a(sa.ok() && !a.skip ? a.series : std::string_view());
  if (sa.ok() && !a.skip) {
    PLIMSOLL_FUZZ_CHECK(!a.series.empty() && a.series.size() <= opt.max_series_bytes);
    PLIMSOLL_FUZZ_CHECK(std::isfinite(a.value));
    PLIMSOLL_FUZZ_CHECK(a.time_ms >= opt.min_time_ms && a.time_ms < opt.max_time_ms);
  } else if (!sa.ok()) {
    PLIMSOLL_FUZZ_CHECK(sa.code() == StatusCode::kInvalidArgument && !sa.message().empty());
  }

  // The same payload in place, followed by padding copied from the input (arbitrary bytes).
  std::vector<char> block(rest.size() + kRecordPadding);
  if (!rest.empty()) std::memcpy(block.data(), rest.data(), rest.size());
  for (size_t i = 0; i < kRecordPadding; ++i) block[rest.size() + i] = size > 1 ? static_cast<char>(data[1 + i % (size - 1)]) : '"';
  DecodedRecord b;
  const Status sb = decoder->DecodePadded(key, std::string_view(block.data(), rest.size()), timestamp, b);
  PLIMSOLL_FUZZ_CHECK(sa == sb);
  if (sb.ok()) {
    PLIMSOLL_FUZZ_CHECK(a.skip == b.skip);
    if (!b.skip) {
      PLIMSOLL_FUZZ_CHECK(series_a == b.series);
      PLIMSOLL_FUZZ_CHECK(a.time_ms == b.time_ms);
      PLIMSOLL_FUZZ_CHECK(std::memcmp(&a.value, &b.value, sizeof(double)) == 0);
    }
  }

  const std::string_view text = rest.substr(0, 80);
  if (Result<int64_t> t = ParseIsoTime(text); t.ok()) {
    Result<int64_t> back = ParseIsoTime(FormatIsoTime(*t));
    PLIMSOLL_FUZZ_CHECK(back.ok() && *back == *t);
  }
  IgnoreError(ParseTimeText(text).status());
  if (Result<std::optional<int64_t>> d = ParseDuration(text); d.ok() && d->has_value()) {
    Result<std::optional<int64_t>> back = ParseDuration(FormatDuration(**d));
    PLIMSOLL_FUZZ_CHECK(back.ok() && *back == *d);
  }
  return 0;
}

}  // namespace plimsoll::stream::fuzz

#ifndef PLIMSOLL_FUZZ_REPLAY
extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  return plimsoll::stream::fuzz::DecodeOne(data, size);
}
#endif
