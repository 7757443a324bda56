#include "plimsoll/base/clock.h"

#include <chrono>

namespace plimsoll {
namespace {

class RealClock final : public Clock {
 public:
  int64_t MonotonicNanos() const override {
    return std::chrono::duration_cast<std::chrono::nanoseconds>(
               std::chrono::steady_clock::now().time_since_epoch())
        .count();
  }
  int64_t WallMillis() const override {
    return std::chrono::duration_cast<std::chrono::milliseconds>(
               std::chrono::system_clock::now().time_since_epoch())
        .count();
  }
};

}  // namespace

Clock* SystemClock() {
  static RealClock clock;
  return &clock;
}

}  // namespace plimsoll
