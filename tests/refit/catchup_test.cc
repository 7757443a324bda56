// The catch-up replay (Engine::InstallModel with live_from, Engine::CompleteWarmup) against the
// inline alternatives it replaces: the state must come out bit-identical.
#include <catch2/catch.hpp>
#include <algorithm>
#include <set>

#include "plimsoll/fit/fit.h"
#include "plimsoll/stream/engine.h"
#include "plimsoll/stream/fit_chooser.h"
#include "refit/refit_test_util.h"

namespace plimsoll::refit {
namespace {

using stream::Engine;
using stream::EngineOptions;
using stream::ModelChoice;
using testing::kMinute;

constexpr int64_t kSpike = 199;  // the last step fed: its effect on the state cannot have decayed

struct Feeder {
  explicit Feeder(bool background = false, stream::FlagPolicy policy = stream::FlagPolicy::kClip) {
    EngineOptions options;
    stream::SeriesRules rules = testing::Profile("*", 24, 400);
    rules.policy = policy;
    options.profiles = {rules};
    options.background_warmup = background;
    engine = std::make_unique<Engine>(options, chooser, &clock);
  }
  void Feed(int64_t from, int64_t to) {
    for (int64_t k = from; k < to; ++k) engine->Observe("s", k * kMinute, Value(k), "s", 0, k);
  }
  // A level shift at step 150 and a spike at kSpike (far outside any band these data give).
  static double Value(int64_t k) { return testing::ShiftedValue(k, 150, 25.0) + (k == kSpike ? 300.0 : 0.0); }
  ManualClock clock;
  stream::ModelChooser chooser = stream::MakeFitChooser(fit::FitOptions{}, &clock);
  std::unique_ptr<Engine> engine;
};

std::vector<double> Values(int64_t from, int64_t to) {
  std::vector<double> out;
  for (int64_t k = from; k < to; ++k) out.push_back(Feeder::Value(k));
  return out;
}

}  // namespace

TEST_CASE("the catch-up after a background refit gives the state of an inline refit at the snapshot",
          "[refit]") {
  constexpr int64_t kSnapshot = 160, kEnd = 200;  // the refit sees steps 0..159; 160..199 arrive meanwhile
  Feeder inline_run;
  inline_run.Feed(0, kSnapshot);
  REQUIRE(inline_run.engine->Refit(0, Values(0, kSnapshot), "inline").ok());
  inline_run.Feed(kSnapshot, kEnd);

  Feeder background;
  background.Feed(0, kEnd);
  Result<ModelChoice> choice = background.chooser(Values(0, kSnapshot), background.engine->options().profiles[0], false);
  REQUIRE(choice.ok());
  const std::vector<double> history = Values(0, kEnd);
  Feeder raw;
  raw.Feed(0, kEnd);
  REQUIRE(background.engine->InstallModel(0, *choice, history, "refit: count", kSnapshot).ok());

  const stream::SeriesView a = inline_run.engine->View(0);
  const stream::SeriesView b = background.engine->View(0);
  CHECK(a.form == b.form);
  CHECK(a.params.alpha == b.params.alpha);
  CHECK(a.state == b.state);  // exact: level, trend, every seasonal value, sigma2, steps

  // The spike is flagged under the new model and clipped by the live path; a plain
  // replay of the raw values would not clip it, so it cannot stand in for the catch-up.
  REQUIRE(raw.engine->InstallModel(0, *choice, history, "refit: count").ok());
  bool spike_flagged = false;
  for (const stream::FlagRecord& f : inline_run.engine->TakeBatch().flags) spike_flagged |= f.step == kSpike;
  REQUIRE(spike_flagged);
  CHECK_FALSE(raw.engine->View(0).state == a.state);
}

TEST_CASE("a background warm-up fit gives the state and flags of an inline one, however late it arrives",
          "[refit]") {
  Feeder inline_run(false);
  inline_run.Feed(0, 200);
  Feeder background(true);
  background.Feed(0, 24);
  std::vector<stream::WarmupRequest> requests = background.engine->TakeWarmupRequests();
  REQUIRE(requests.size() == 1);
  CHECK(requests[0].values == Values(0, 24));
  CHECK(background.engine->View(0).warming_up);
  background.Feed(24, 200);  // the fit is still running: the series keeps buffering
  CHECK(background.engine->TakeWarmupRequests().empty());
  CHECK(background.engine->View(0).warming_up);
  Result<ModelChoice> choice = background.chooser(requests[0].values, background.engine->options().profiles[0], false);
  REQUIRE(background.engine->CompleteWarmup(0, requests[0].epoch, choice).ok());

  const stream::SeriesView a = inline_run.engine->View(0);
  const stream::SeriesView b = background.engine->View(0);
  CHECK_FALSE(b.warming_up);
  CHECK(a.form == b.form);
  CHECK(a.state == b.state);
  CHECK(a.alert_active == b.alert_active);
  auto flag_steps = [](Engine& e) {
    std::set<int64_t> steps;
    for (const stream::FlagRecord& f : e.TakeBatch().flags) steps.insert(f.step);
    return steps;
  };
  const std::set<int64_t> inline_flags = flag_steps(*inline_run.engine);
  REQUIRE(inline_flags.count(kSpike) == 1);  // flags after the warm-up are raised by the catch-up
  CHECK(flag_steps(*background.engine) == inline_flags);
  // A second completion of the same round is stale.
  CHECK(background.engine->CompleteWarmup(0, requests[0].epoch, choice).code() == StatusCode::kAborted);
}

TEST_CASE("a restart while a warm-up fit is out asks again for the same fit", "[refit]") {
  Feeder first(true);
  first.Feed(0, 30);
  std::vector<stream::WarmupRequest> asked = first.engine->TakeWarmupRequests();
  REQUIRE(asked.size() == 1);
  std::vector<double> stored;
  for (const stream::HistoryPoint& h : first.engine->TakeBatch().history) stored.push_back(h.value);
  Feeder second(true);
  REQUIRE(second.engine
              ->RestoreSeries("s", first.engine->EncodeCheckpoint(0),
                              [&]() -> Result<std::vector<double>> { return stored; })
              .ok());
  std::vector<stream::WarmupRequest> again = second.engine->TakeWarmupRequests();
  REQUIRE(again.size() == 1);
  CHECK(again[0].values == asked[0].values);
}

TEST_CASE("a warm-up fit that never comes back is done inline once the buffer reaches the history bound",
          "[refit]") {
  Feeder background(true);
  background.Feed(0, 400);
  REQUIRE(background.engine->TakeWarmupRequests().size() == 1);
  CHECK(background.engine->View(0).warming_up);
  background.Feed(400, 402);  // 401 buffered > history 400
  CHECK_FALSE(background.engine->View(0).warming_up);
  Feeder inline_run(false);
  inline_run.Feed(0, 402);
  CHECK(inline_run.engine->View(0).state == background.engine->View(0).state);
}

}  // namespace plimsoll::refit
