#pragma once
// AlertTracker: turns a series' stream of flagged / in-band observations into alert transitions
// with hysteresis. Raised when `breach_run` of the last `window` observations were flagged
// (window == breach_run means "breach_run in a row"); cleared after `clear_run` consecutive
// in-band observations. Gap steps are not observations and do not move it.
//
// Thread-safety: value type owned by the engine's owner thread. 16 bytes.

#include <bit>
#include <cstdint>
#include <string>
#include <string_view>

#include "plimsoll/base/bytes.h"

namespace plimsoll::stream {

struct AlertRule {
  int breach_run = 3;  // flags needed to raise, 1..64
  int window = 3;      // over this many most recent observations, breach_run..64
  int clear_run = 4;   // consecutive in-band observations needed to clear, >= 1
};

enum class AlertTransition : uint8_t { kNone = 0, kRaised = 1, kCleared = 2 };

class AlertTracker {
 public:
  // REQUIRES: rule validated (see AlertRule ranges).
  AlertTransition Observe(bool flagged, const AlertRule& rule) {
    const uint64_t window_mask = rule.window >= 64 ? ~uint64_t{0} : (uint64_t{1} << rule.window) - 1;
    recent_ = ((recent_ << 1) | (flagged ? 1u : 0u)) & window_mask;
    in_band_run_ = flagged ? 0 : in_band_run_ + 1;
    if (!active_ && std::popcount(recent_) >= rule.breach_run) {
      active_ = true;
      return AlertTransition::kRaised;
    }
    if (active_ && in_band_run_ >= static_cast<uint32_t>(rule.clear_run)) {
      active_ = false;
      recent_ = 0;
      return AlertTransition::kCleared;
    }
    return AlertTransition::kNone;
  }
  bool active() const { return active_; }
  void Reset() { *this = AlertTracker(); }

  static constexpr size_t kEncodedBytes = 8 + 4 + 1;
  void EncodeTo(ByteWriter& w) const {
    w.Put(recent_);
    w.Put(in_band_run_);
    w.Put<uint8_t>(active_ ? 1 : 0);
  }
  // Returns false (tracker unchanged) for malformed bytes.
  [[nodiscard]] bool Decode(std::string_view bytes) {
    ByteReader r(bytes);
    AlertTracker t;
    uint8_t active = 0;
    if (!r.Get(t.recent_) || !r.Get(t.in_band_run_) || !r.Get(active) || active > 1 || r.remaining() != 0) return false;
    t.active_ = active != 0;
    *this = t;
    return true;
  }

 private:
  uint64_t recent_ = 0;      // bit i set: the observation i steps back was flagged
  uint32_t in_band_run_ = 0;
  bool active_ = false;
};

}  // namespace plimsoll::stream
