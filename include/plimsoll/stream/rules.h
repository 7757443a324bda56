#pragma once
// SeriesRules: how the engine treats the series of one profile, resolved from the configuration
// (config.h parses and validates; this is the compact form the engine keeps).
// Thread-safety: value types.

#include <cstdint>
#include <string>
#include <vector>

#include "plimsoll/model/spec.h"

namespace plimsoll::stream {

// Never renumber: stored with profiles.
enum class FlagPolicy : uint8_t {
  kUpdate = 0,  // a flagged value updates the state as it is
  kClip = 1,    // the state sees the value clipped to the band edge (default: one spike does not drag the level)
  kSkip = 2,    // a flagged value advances the state like a gap
};

enum class AggregateKind : uint8_t { kNone = 0, kCount = 1, kSum = 2, kMean = 3, kMax = 4, kLast = 5 };

struct SeriesRules {
  std::string match = "*";        // glob on the series id (for display)
  int64_t interval_ms = 0;        // 0: event-indexed (every record is the next step)
  AggregateKind aggregate = AggregateKind::kNone;
  int64_t max_gap_steps = 96;     // a longer silence re-seeds the series
  int64_t allowed_lateness_ms = 0;
  int period = 1;                 // season length m (1: no season)
  std::vector<model::ModelSpec> forms;  // empty: automatic selection over the default candidates
  double band_level = 0.99;       // two-sided band level, in (0, 1)
  int history = 2000;             // points kept for refits
  int warmup = 48;                // observations before the first fit (>= 2 * period for seasonal forms)
  FlagPolicy policy = FlagPolicy::kClip;
  int breach_run = 3;             // flags that raise an alert ...
  int breach_window = 3;          // ... among this many most recent observations
  int clear_run = 4;              // in-band observations in a row that clear it
};

}  // namespace plimsoll::stream
