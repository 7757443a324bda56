// libFuzzer target for the TOML configuration loader and the profile globs (see run_fuzz.sh).
// Checks, beyond "no crash, no sanitizer report, no exception escaping ParseConfig": a config
// that loads satisfies the validated invariants, and every glob in it runs on a few ids.

#include <algorithm>
#include <cstdint>
#include <string_view>

#include "plimsoll/stream/config.h"
#include "stream/fuzz/fuzz_check.h"

namespace plimsoll::stream::fuzz {

inline int ConfigOne(const uint8_t* data, size_t size) {
  const std::string_view text(reinterpret_cast<const char*>(data), size);
  // The glob matcher on raw pieces of the input, valid pattern or not: must end without crashing.
  const bool hit = GlobMatch(text.substr(0, 16), text.substr(std::min<size_t>(16, size), 48));
  PLIMSOLL_FUZZ_CHECK(hit || !hit);
  if (ValidateGlob(text.substr(0, 16)).ok()) PLIMSOLL_FUZZ_CHECK(GlobMatch("*", text));
  Result<Config> c = ParseConfig(text, "fuzz.toml");
  if (!c.ok()) {
    PLIMSOLL_FUZZ_CHECK(c.status().code() == StatusCode::kInvalidArgument);
    PLIMSOLL_FUZZ_CHECK(c.status().message().rfind("fuzz.toml", 0) == 0);  // every error names the origin
    return 0;
  }
  PLIMSOLL_FUZZ_CHECK(!c->profiles.empty());
  PLIMSOLL_FUZZ_CHECK(c->band.level > 0 && c->band.level < 1);
  PLIMSOLL_FUZZ_CHECK(c->source.decode.Validate().ok());
  PLIMSOLL_FUZZ_CHECK(c->source.read_buffer_bytes > c->source.decode.max_record_bytes);
  for (const ProfileOptions& p : c->profiles) {
    PLIMSOLL_FUZZ_CHECK(p.band > 0 && p.band < 1);
    PLIMSOLL_FUZZ_CHECK(p.warmup <= p.history);
    PLIMSOLL_FUZZ_CHECK(p.period == 1 || p.warmup >= 2 * p.period);
    PLIMSOLL_FUZZ_CHECK(!p.interval_ms || *p.interval_ms > 0);
    PLIMSOLL_FUZZ_CHECK(p.aggregate == AggregateKind::kNone || p.interval_ms.has_value());
    PLIMSOLL_FUZZ_CHECK(ValidateGlob(p.match).ok());
    for (const model::ModelSpec& f : p.forms) PLIMSOLL_FUZZ_CHECK(f.period == p.period || !f.has_season());
  }
  for (std::string_view id : {std::string_view("queue-7"), std::string_view(""), text.substr(0, 32)}) {
    const int i = c->MatchProfile(id);
    PLIMSOLL_FUZZ_CHECK(i >= -1 && i < static_cast<int>(c->profiles.size()));
  }
  return 0;
}

}  // namespace plimsoll::stream::fuzz

#ifndef PLIMSOLL_FUZZ_REPLAY
extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  return plimsoll::stream::fuzz::ConfigOne(data, size);
}
#endif
