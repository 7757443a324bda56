// The refit service with a fast deterministic chooser, an in-memory history and a ManualClock:
// which triggers queue a refit, what is installed, what is discarded and why.
#include <catch2/catch.hpp>
#include <atomic>
#include <chrono>
#include <cmath>
#include <thread>

#include "plimsoll/refit/refit.h"
#include "refit/refit_test_util.h"
#include "stream/level_choice_util.h"

namespace plimsoll::refit {
namespace {

using stream::ModelChoice;
using testing::Harness;

// ETS(A,N,N), alpha 0.9, level at the first observed value, sigma2 1. Thread-safe; a test can
// make refits (calls after the first) fail, block until released, or spend clock time.
struct TestChooser {
  std::atomic<int> calls{0};
  std::atomic<int> running{0};
  std::atomic<int> max_running{0};
  std::atomic<bool> fail{false};
  std::atomic<bool> hold{false};
  std::atomic<int64_t> spend_ms{0};
  ManualClock* clock = nullptr;

  Result<ModelChoice> operator()(std::span<const double> history) {
    calls.fetch_add(1);
    const int now = running.fetch_add(1) + 1;
    int seen = max_running.load();
    while (now > seen && !max_running.compare_exchange_weak(seen, now)) {}
    while (hold.load()) std::this_thread::sleep_for(std::chrono::milliseconds(1));
    if (clock != nullptr && spend_ms.load() > 0) clock->AdvanceMillis(spend_ms.load());
    running.fetch_sub(1);
    if (fail.load()) return Status::NumericFailure("test chooser told to fail");
    ModelChoice c = stream::testing::LevelChoice(history, 0.9, 1.0);
    c.aicc = static_cast<double>(history.size());
    return c;
  }
};

struct Setup {
  explicit Setup(RefitServiceOptions options = {}, stream::SeriesRules rules = testing::Profile("*", 10, 200),
                 bool background = false) {
    chooser.clock = nullptr;
    if (options.profiles.empty()) options.profiles = {TriggerRules{}};
    h = std::make_unique<Harness>(
        std::vector<stream::SeriesRules>{rules}, options,
        [this](std::span<const double> y, const stream::SeriesRules&, bool) { return chooser(y); }, background);
    chooser.clock = &h->clock;
  }
  void Feed(int64_t from, int64_t to, double level) {
    for (int64_t k = from; k < to; ++k) h->Feed("s", k, level + ((k % 2) != 0 ? 0.5 : -0.5));
  }
  bool HasEvent(const std::string& kind, const std::string& text = "") const {
    for (const store::EventRecord& e : h->events)
      if (e.kind == kind && e.detail.find(text) != std::string::npos) return true;
    return false;
  }
  TestChooser chooser;
  std::unique_ptr<Harness> h;
};

}  // namespace

TEST_CASE("a raised alert queues a refit whose model follows the shift, and the alert clears", "[refit]") {
  Setup s;
  s.Feed(0, 40, 100.0);
  s.h->Pump();
  REQUIRE_FALSE(s.h->engine->View(0).warming_up);
  s.Feed(40, 43, 130.0);  // three flags in a row raise the alert
  REQUIRE(s.h->engine->View(0).alert_active);
  REQUIRE(s.h->PumpUntil([&] { return s.h->Counters().installed == 1; }));
  CHECK(s.HasEvent("model_changed", "\"trigger\":\"alert\""));
  CHECK(s.HasEvent("model_changed", "\"old_form\":\"ETS(A,N,N)\""));
  CHECK(std::abs(s.h->engine->View(0).state.level - 130.0) < 1.0);
  s.Feed(43, 50, 130.0);
  CHECK_FALSE(s.h->engine->View(0).alert_active);
}

TEST_CASE("refit_every observations after the model queue a count refit", "[refit]") {
  RefitServiceOptions options;
  options.profiles = {TriggerRules{25, std::nullopt, false}};
  Setup s(options);
  s.Feed(0, 10, 100.0);  // warm-up fit (inline here)
  s.h->Pump();
  s.Feed(10, 34, 100.0);
  s.h->Pump();
  CHECK(s.h->Counters().started == 0);
  s.Feed(34, 35, 100.0);  // the 25th observation since the model
  REQUIRE(s.h->PumpUntil([&] { return s.h->Counters().installed == 1; }));
  CHECK(s.HasEvent("model_changed", "\"trigger\":\"count\""));
}

TEST_CASE("a model older than refit_max_age is refitted when the clock passes the age", "[refit]") {
  RefitServiceOptions options;
  options.profiles = {TriggerRules{0, int64_t{3'600'000}, false}};
  options.age_scan_ms = 1;
  Setup s(options);
  s.Feed(0, 12, 100.0);
  s.h->Pump();
  s.h->clock.AdvanceMillis(3'599'000);
  s.h->Pump();
  s.h->Pump();
  CHECK(s.h->Counters().started == 0);
  s.h->clock.AdvanceMillis(1'000);
  REQUIRE(s.h->PumpUntil([&] { return s.h->Counters().installed == 1; }));
  CHECK(s.HasEvent("model_changed", "\"trigger\":\"age\""));
}

TEST_CASE("a failed refit keeps the model and records why", "[refit]") {
  Setup s;
  s.Feed(0, 40, 100.0);
  s.h->Pump();
  const stream::SeriesView before = s.h->engine->View(0);
  s.chooser.fail = true;
  s.Feed(40, 43, 130.0);
  REQUIRE(s.h->PumpUntil([&] { return s.h->Counters().failed == 1; }));
  CHECK(s.HasEvent("refit_failed", "test chooser told to fail"));
  CHECK(s.h->Counters().installed == 0);
  CHECK(s.h->engine->View(0).form == before.form);
  CHECK(s.h->engine->View(0).params.alpha == before.params.alpha);
}

TEST_CASE("a refit over its time budget keeps the model and says so", "[refit]") {
  RefitServiceOptions options;
  options.time_budget_ms = 50;
  Setup s(options);
  s.Feed(0, 40, 100.0);
  s.h->Pump();
  s.chooser.spend_ms = 80;  // the fit takes 80 ms of (manual) clock time
  s.Feed(40, 43, 130.0);
  REQUIRE(s.h->PumpUntil([&] { return s.h->Counters().timed_out == 1; }));
  CHECK(s.HasEvent("refit_failed", "over the time budget (80 ms > 50 ms)"));
  CHECK(s.h->Counters().installed == 0);
}

TEST_CASE("a refit whose series moved on beyond the lag bound is discarded and counted", "[refit]") {
  RefitServiceOptions options;
  options.max_lag_steps = 5;
  Setup s(options);
  s.Feed(0, 40, 100.0);
  s.h->Pump();
  s.chooser.hold = true;
  s.Feed(40, 43, 130.0);
  s.h->Pump();
  REQUIRE(s.h->Counters().started == 1);
  s.Feed(43, 50, 130.0);  // 7 steps after the snapshot
  s.h->Pump();
  s.chooser.hold = false;
  REQUIRE(s.h->PumpUntil([&] { return s.h->Counters().discarded_lag == 1; }));
  CHECK(s.h->Counters().installed == 0);
  CHECK(s.HasEvent("refit_discarded", "moved on"));
}

TEST_CASE("at most one refit runs per series; a trigger meanwhile waits for it", "[refit]") {
  RefitServiceOptions options;
  options.threads = 3;
  options.profiles = {TriggerRules{3, std::nullopt, true}};
  Setup s(options);
  s.Feed(0, 12, 100.0);
  s.h->Pump();
  s.chooser.hold = true;
  s.Feed(12, 15, 100.0);  // count trigger
  s.h->Pump();
  REQUIRE(s.h->Counters().started == 1);
  s.Feed(15, 18, 140.0);  // alert while the count refit runs
  s.h->Pump();
  s.h->Pump();
  CHECK(s.h->Counters().started == 1);
  s.chooser.hold = false;
  REQUIRE(s.h->PumpUntil([&] { return s.h->Counters().installed == 2; }));
  CHECK(s.chooser.max_running.load() == 1);
}

TEST_CASE("warm-up fits run on the pool and the series buffers until the model arrives", "[refit]") {
  Setup s(RefitServiceOptions{}, testing::Profile("*", 10, 200), /*background=*/true);
  s.chooser.hold = true;
  s.Feed(0, 15, 100.0);
  REQUIRE(s.h->PumpUntil([&] { return s.chooser.calls.load() == 1; }));  // on a worker, not in Observe
  CHECK(s.h->engine->View(0).warming_up);
  s.chooser.hold = false;
  REQUIRE(s.h->PumpUntil([&] { return s.h->Counters().warmups == 1; }));
  CHECK_FALSE(s.h->engine->View(0).warming_up);
  CHECK(s.h->engine->View(0).last_step == 14);
}

TEST_CASE("at stop, queued warm-up fits still run; the next batch installs them", "[refit]") {
  Setup s(RefitServiceOptions{}, testing::Profile("*", 10, 200), /*background=*/true);
  for (int64_t k = 0; k < 12; ++k)
    for (const char* name : {"a", "b", "c"}) s.h->Feed(name, k, 100.0 + (k % 2));
  s.h->Pump();  // one worker: one warm-up starts, two wait in the queue
  s.h->service->Stop(*s.h->engine);
  s.h->Pump();
  CHECK(s.h->Counters().warmups == 3);
  for (stream::SeriesId id = 0; id < 3; ++id) CHECK_FALSE(s.h->engine->View(id).warming_up);
}

}  // namespace plimsoll::refit
