#pragma once
// State: the latent states of one series after its last observation.
//
// The seasonal part is a ring of m values. season[head] is the seasonal state that applies to
// the NEXT observation (s_{t+1-m}); an update overwrites that slot with s_{t+1} and advances head,
// so a step touches O(1) memory whatever m is.
//
// Thread-safety: value type; the engine's owner thread owns the live copies.

#include <cstdint>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "plimsoll/base/status.h"
#include "plimsoll/model/spec.h"

namespace plimsoll::model {

struct State {
  double level = 0.0;
  double trend = 0.0;          // slope b (additive trends) or growth ratio (multiplicative)
  std::vector<double> season;  // size m for seasonal forms, empty otherwise
  uint32_t head = 0;           // ring index of the seasonal value for the next observation
  double sigma2 = 0.0;         // innovation variance (relative errors for M error)
  int64_t steps = 0;           // observations and gap steps applied since the initial state

  // Seasonal value for the observation `ahead` steps from now (ahead = 1: the next one).
  // REQUIRES: !season.empty(), ahead >= 1.
  double SeasonAhead(int ahead) const {
    return season[(head + static_cast<uint32_t>(ahead - 1)) % season.size()];
  }
  friend bool operator==(const State&, const State&) = default;
};

// Builds a state from seasonal values in chronological order: seasonal_chrono[k] is the state
// that applies to the k-th next observation (k = 0 first), i.e. s_{1-m}, ..., s_0.
State MakeState(double level, double trend, std::span<const double> seasonal_chrono, double sigma2 = 0.0);

// Seasonal values in chronological order (the inverse of MakeState's argument).
std::vector<double> SeasonChronological(const State& state);

// Compact binary encoding (little-endian doubles, versioned) for SQLite and the changelog topic.
// Encode/Decode round-trip bit-exactly. Decode fails with Corruption naming what is wrong.
std::string EncodeState(const State& state);
Result<State> DecodeState(std::string_view bytes);
// The same encoding appended to `out`, and its length (checkpoints embed it without a copy).
void AppendState(const State& state, std::string& out);
size_t EncodedStateBytes(const State& state);

}  // namespace plimsoll::model
