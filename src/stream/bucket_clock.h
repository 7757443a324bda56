#pragma once
// BucketClock: the time that closes aggregation buckets (Engine::AdvanceClock).
//
// Records carry their own times. A backlog consumed after downtime must be bucketed by those
// times: closing buckets by the wall clock would close every bucket of the backlog at once, emit
// zero-count steps for them, and turn the backlog's records into "late" dead letters. A silent
// feed must still close its buckets (zero-count steps), so while no records arrive the clock runs
// on with wall time from the newest record time. With `follow_wall` off (files, simulated time)
// only record times move it, which keeps replays deterministic.
//
// Thread-safety: value type owned by the daemon's owner thread.

#include <algorithm>
#include <cstdint>
#include <limits>
#include <optional>

namespace plimsoll::stream {

class BucketClock {
 public:
  explicit BucketClock(bool follow_wall) : follow_wall_(follow_wall) {}

  // A poll delivered records, the newest of them stamped `newest_record_ms`, at wall time
  // `wall_ms`. Also used at start-up with the newest restored record time.
  void OnRecords(int64_t newest_record_ms, int64_t wall_ms) {
    newest_record_ms_ = std::max(newest_record_ms_, newest_record_ms);
    last_records_wall_ms_ = wall_ms;
  }

  // The bucket-closing time at wall time `wall_ms`; nullopt before any record was seen. Never
  // goes back, also when an older record re-anchors the wall-time run-on.
  std::optional<int64_t> Now(int64_t wall_ms) {
    if (newest_record_ms_ == kNone) return std::nullopt;
    int64_t now = newest_record_ms_;
    if (follow_wall_) now += std::max<int64_t>(0, wall_ms - last_records_wall_ms_);
    last_now_ms_ = std::max(last_now_ms_, now);
    return last_now_ms_;
  }

 private:
  // Plain sentinels rather than std::optional: GCC 12 warns (maybe-uninitialized) about the
  // optional's payload once this is inlined into the daemon loop.
  static constexpr int64_t kNone = std::numeric_limits<int64_t>::min();
  bool follow_wall_;
  int64_t newest_record_ms_ = kNone;
  int64_t last_records_wall_ms_ = 0;
  int64_t last_now_ms_ = kNone;
};

}  // namespace plimsoll::stream
