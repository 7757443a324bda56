// BucketClock: record times close buckets; wall time carries a silent feed on.
#include <catch2/catch.hpp>

#include "stream/bucket_clock.h"

namespace plimsoll::stream {
namespace {

constexpr int64_t kHour = 3'600'000;

TEST_CASE("a backlog is bucketed by its record times, not by the wall clock", "[stream]") {
  BucketClock clock(/*follow_wall=*/true);
  CHECK_FALSE(clock.Now(10 * kHour).has_value());
  // Restarted at 10:00 wall time; the backlog starts at 07:00 and arrives in every poll.
  const int64_t wall = 10 * kHour;
  for (int poll = 0; poll < 100; ++poll) {
    clock.OnRecords(7 * kHour + poll * 60'000, wall + poll);
    CHECK(*clock.Now(wall + poll) == 7 * kHour + poll * 60'000);
  }
}

TEST_CASE("a silent feed's clock runs on with wall time from its newest record", "[stream]") {
  BucketClock clock(/*follow_wall=*/true);
  clock.OnRecords(5 * kHour, 9 * kHour);
  CHECK(*clock.Now(9 * kHour) == 5 * kHour);
  CHECK(*clock.Now(9 * kHour + 90'000) == 5 * kHour + 90'000);
  // A record no newer (another partition behind) re-anchors the run-on but never moves the
  // clock back; it runs on once the newest record time plus wall time passes it.
  clock.OnRecords(4 * kHour, 9 * kHour + 100'000);
  CHECK(*clock.Now(9 * kHour + 100'000) == 5 * kHour + 90'000);
  CHECK(*clock.Now(9 * kHour + 200'000) == 5 * kHour + 100'000);
}

TEST_CASE("without follow_wall only record times move the bucket clock", "[stream]") {
  BucketClock clock(/*follow_wall=*/false);
  clock.OnRecords(5 * kHour, 0);
  CHECK(*clock.Now(100 * kHour) == 5 * kHour);
  clock.OnRecords(6 * kHour, 1);
  CHECK(*clock.Now(100 * kHour) == 6 * kHour);
}

}  // namespace
}  // namespace plimsoll::stream
