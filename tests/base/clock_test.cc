#include "plimsoll/base/clock.h"

#include <catch2/catch.hpp>

namespace plimsoll {

TEST_CASE("manual clock moves only when advanced", "[base]") {
  ManualClock clock(1'000, 5);
  CHECK(clock.WallMillis() == 1'000);
  CHECK(clock.MonotonicNanos() == 5);
  clock.AdvanceMillis(250);
  CHECK(clock.WallMillis() == 1'250);
  CHECK(clock.MonotonicNanos() == 5 + 250'000'000);
}

TEST_CASE("system clock is monotonic", "[base]") {
  Clock* clock = SystemClock();
  int64_t a = clock->MonotonicNanos();
  int64_t b = clock->MonotonicNanos();
  CHECK(b >= a);
  CHECK(clock->WallMillis() > 1'600'000'000'000);  // after 2020: the OS clock is set
}
}  // namespace plimsoll
