#include "plimsoll/refit/scheduler.h"

#include <catch2/catch.hpp>

#include "plimsoll/base/clock.h"

namespace plimsoll::refit {

TEST_CASE("the count trigger fires once after refit_every observations and again after the next model",
          "[refit]") {
  RefitTriggers triggers({TriggerRules{10, std::nullopt, true}});
  CHECK_FALSE(triggers.Observed(0, 0, 5));  // no model yet: warm-up, not a refit
  triggers.ModelInstalled(0, 0, 1000);
  CHECK_FALSE(triggers.Observed(0, 0, 9));
  CHECK(triggers.Observed(0, 0, 1));
  CHECK_FALSE(triggers.Observed(0, 0, 30));  // fired once until the next model
  triggers.ModelInstalled(0, 0, 2000);
  CHECK_FALSE(triggers.Observed(0, 0, 9));
  CHECK(triggers.Observed(0, 0, 1));
  triggers.Rearm(0);  // a failed refit: counting starts over
  CHECK_FALSE(triggers.Observed(0, 0, 9));
  CHECK(triggers.Observed(0, 0, 1));
}

TEST_CASE("the age trigger follows the clock and fires once per model", "[refit]") {
  ManualClock clock(1'000'000);
  RefitTriggers triggers({TriggerRules{0, int64_t{3'600'000}, false}, TriggerRules{0, std::nullopt, true}});
  triggers.ModelInstalled(0, 0, clock.WallMillis());
  triggers.ModelInstalled(1, 1, clock.WallMillis());  // profile 1 never refits by age
  clock.AdvanceMillis(3'599'999);
  CHECK(triggers.Aged(clock.WallMillis()).empty());
  clock.AdvanceMillis(1);
  CHECK(triggers.Aged(clock.WallMillis()) == std::vector<SeriesId>{0});
  clock.AdvanceMillis(10 * 3'600'000);
  CHECK(triggers.Aged(clock.WallMillis()).empty());
  triggers.ModelInstalled(0, 0, clock.WallMillis());
  clock.AdvanceMillis(3'600'000);
  CHECK(triggers.Aged(clock.WallMillis()) == std::vector<SeriesId>{0});
  CHECK(triggers.OnAlert(1));
  CHECK_FALSE(triggers.OnAlert(0));
  CHECK_FALSE(triggers.OnAlert(7));  // unknown profile
}

TEST_CASE("the queue hands out alerts first, then the oldest models", "[refit]") {
  RefitQueue queue(10);
  REQUIRE(queue.Push({1, Trigger::kCount, 500}));
  REQUIRE(queue.Push({2, Trigger::kAge, 100}));
  REQUIRE(queue.Push({3, Trigger::kAlert, 900}));
  REQUIRE(queue.Push({4, Trigger::kWarmup, INT64_MIN}));
  REQUIRE(queue.Push({5, Trigger::kRequest, 100}));
  std::vector<SeriesId> order;
  while (std::optional<RefitTask> t = queue.Pop()) order.push_back(t->series);
  CHECK(order == std::vector<SeriesId>{3, 4, 2, 5, 1});
  CHECK(queue.counters().queued == 5);
}

TEST_CASE("a second task for a queued series merges, and an alert upgrades it", "[refit]") {
  RefitQueue queue(10);
  REQUIRE(queue.Push({1, Trigger::kCount, 500}));
  REQUIRE(queue.Push({2, Trigger::kCount, 400}));
  REQUIRE(queue.Push({1, Trigger::kAge, 500}));
  CHECK(queue.size() == 2);
  REQUIRE(queue.Push({1, Trigger::kAlert, 500}));
  CHECK(queue.size() == 2);
  CHECK(queue.counters().merged == 2);
  std::optional<RefitTask> first = queue.Pop();
  REQUIRE(first);
  CHECK(first->series == 1);
  CHECK(first->trigger == Trigger::kAlert);
  CHECK(queue.Pop()->series == 2);
  CHECK_FALSE(queue.Pop());
}

TEST_CASE("a full queue drops the least urgent task and counts it", "[refit]") {
  RefitQueue queue(2);
  REQUIRE(queue.Push({1, Trigger::kCount, 100}));
  REQUIRE(queue.Push({2, Trigger::kCount, 300}));
  // Newer model than everything queued: the newcomer itself is dropped.
  CHECK_FALSE(queue.Push({3, Trigger::kCount, 400}));
  // An alert displaces the newest model.
  CHECK(queue.Push({4, Trigger::kAlert, 999}));
  CHECK(queue.counters().dropped == 2);
  CHECK_FALSE(queue.Contains(2));
  CHECK(queue.Pop()->series == 4);
  CHECK(queue.Pop()->series == 1);
  CHECK(queue.Clear() == 0);
  CHECK(OverflowPolicyName(OverflowPolicy::kDropLeastUrgent) == "drop-least-urgent");
}

}  // namespace plimsoll::refit
