#pragma once
// Clock: the only way plimsoll code reads time. SystemClock reads the OS; ManualClock is driven by
// tests (and by the demo's accelerated time). Numerical code never reads a clock: it takes time
// as an argument.
//
// Thread-safety: SystemClock is stateless. ManualClock's reads and Advance/Set are atomic, so a
// test thread may drive it while workers read it.

#include <atomic>
#include <cstdint>

namespace plimsoll {

class Clock {
 public:
  virtual ~Clock() = default;
  // Monotonic time in nanoseconds from an arbitrary origin; for durations and timers.
  virtual int64_t MonotonicNanos() const = 0;
  // Wall-clock time in milliseconds since the Unix epoch; for record times and ages.
  virtual int64_t WallMillis() const = 0;
};

// Returns the process-wide real clock. Never null, never destroyed.
Clock* SystemClock();

// A clock that moves only when told to. Starts at the given instants.
class ManualClock final : public Clock {
 public:
  explicit ManualClock(int64_t wall_millis = 0, int64_t monotonic_nanos = 0)
      : wall_millis_(wall_millis), monotonic_nanos_(monotonic_nanos) {}
  int64_t MonotonicNanos() const override { return monotonic_nanos_.load(std::memory_order_acquire); }
  int64_t WallMillis() const override { return wall_millis_.load(std::memory_order_acquire); }
  // Moves both readings forward by `millis`. REQUIRES: millis >= 0.
  void AdvanceMillis(int64_t millis) {
    wall_millis_.fetch_add(millis, std::memory_order_acq_rel);
    monotonic_nanos_.fetch_add(millis * 1'000'000, std::memory_order_acq_rel);
  }
  void SetWallMillis(int64_t wall_millis) { wall_millis_.store(wall_millis, std::memory_order_release); }

 private:
  std::atomic<int64_t> wall_millis_;
  std::atomic<int64_t> monotonic_nanos_;
};

}  // namespace plimsoll
