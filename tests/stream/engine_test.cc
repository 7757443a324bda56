#include "plimsoll/stream/engine.h"

#include <catch2/catch.hpp>
#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "plimsoll/model/forecast.h"
#include "plimsoll/model/update.h"

namespace plimsoll::stream {
namespace {

constexpr int64_t kMinute = 60'000;

// A deterministic chooser for engine tests: ETS(A,N,N) (or the spec under test) with fixed
// parameters, level seeded at the first observation and sigma2 = 1. Fitting itself is tested in
// the fit module; here only the engine's handling of a chosen model matters.
struct FixedChooser {
  model::ModelSpec spec{model::ErrorType::kAdditive, model::TrendType::kNone, model::SeasonType::kNone, 1};
  double sigma2 = 1.0;
  int calls = 0;
  bool fail = false;
  Result<ModelChoice> operator()(std::span<const double> history, const SeriesRules&, bool additive_only) {
    ++calls;
    if (fail) return Status::NumericFailure("test chooser told to fail");
    ModelChoice c;
    c.spec = additive_only ? model::ModelSpec{} : spec;
    c.params.alpha = 0.5;
    double first = 0;
    for (double v : history)
      if (!std::isnan(v)) {
        first = v;
        break;
      }
    c.initial.level = first;
    c.initial.sigma2 = sigma2;
    return c;
  }
};

SeriesRules Profile(std::string match, int64_t interval_ms = kMinute, int warmup = 4) {
  SeriesRules r;
  r.match = std::move(match);
  r.interval_ms = interval_ms;
  r.warmup = warmup;
  r.history = 100;
  r.band_level = 0.99;
  r.breach_run = 2;
  r.breach_window = 2;
  r.clear_run = 2;
  return r;
}

struct Harness {
  explicit Harness(std::vector<SeriesRules> profiles, bool create = true) {
    EngineOptions options;
    options.profiles = std::move(profiles);
    options.create_series = create;
    engine = std::make_unique<Engine>(
        options,
        [this](std::span<const double> h, const SeriesRules& r, bool a) { return chooser(h, r, a); }, &clock);
  }
  void Feed(const std::string& series, int64_t step, double value) {
    engine->Observe(series, step * kMinute, value, series + "," + std::to_string(step), 0, step);
  }
  FixedChooser chooser;
  ManualClock clock;
  std::unique_ptr<Engine> engine;
};

}  // namespace

TEST_CASE("series are created from the first matching profile; unmatched series are dead-lettered", "[stream]") {
  Harness h({Profile("queue-*"), Profile("sensor-?")});
  h.Feed("queue-7", 0, 10.0);
  h.Feed("sensor-12", 0, 1.0);  // '?' matches one character only
  EngineBatch b = h.engine->TakeBatch();
  REQUIRE(h.engine->series_count() == 1);
  CHECK(h.engine->View(0).profile == "queue-*");
  REQUIRE(b.dead_letters.size() == 1);
  CHECK(b.dead_letters[0].reason == "no profile matches series 'sensor-12'");
  CHECK(b.dead_letters[0].raw == "sensor-12,0");
}

TEST_CASE("unknown series are dead-lettered when creation is disabled", "[stream]") {
  Harness h({Profile("*")}, /*create=*/false);
  h.Feed("queue-1", 0, 1.0);
  EngineBatch b = h.engine->TakeBatch();
  REQUIRE(b.dead_letters.size() == 1);
  CHECK(b.dead_letters[0].reason == "unknown series 'queue-1' (series creation is disabled)");
}

TEST_CASE("warm-up buffers points, fits once and replays them; no flags before the model exists", "[stream]") {
  Harness h({Profile("*")});
  std::vector<double> values = {10, 50, 11, 12};  // 50 would be flagged if a model existed
  for (int k = 0; k < 4; ++k) h.Feed("s", k, values[k]);
  EngineBatch b = h.engine->TakeBatch();
  CHECK(b.flags.empty());
  CHECK(h.chooser.calls == 1);
  REQUIRE(b.events.size() == 2);
  CHECK(b.events[0].kind == EventKind::kCreated);
  CHECK(b.events[1].kind == EventKind::kModelChosen);
  REQUIRE(b.models.size() == 1);
  CHECK(b.models[0].reason == "warmup");
  CHECK(b.models[0].step == 3);
  CHECK(b.history.size() == 4);
  // The replayed state equals running the kernel by hand from the chosen initial state.
  model::State expected;
  expected.level = 10;
  expected.sigma2 = 1;
  for (double v : values) model::Update(model::ModelSpec{}, model::Params{0.5, 0, 0, 1}, expected, v);
  SeriesView v = h.engine->View(0);
  CHECK_FALSE(v.warming_up);
  CHECK(v.state == expected);
}

TEST_CASE("a value outside the band is flagged and, under clip, the state sees the band edge", "[stream]") {
  Harness h({Profile("*")});
  for (int k = 0; k < 4; ++k) h.Feed("s", k, 10.0);
  h.engine->TakeBatch();
  const model::State before = h.engine->View(0).state;
  h.Feed("s", 4, 30.0);
  EngineBatch b = h.engine->TakeBatch();
  REQUIRE(b.flags.size() == 1);
  const FlagRecord& f = b.flags[0];
  const double z = model::TwoSidedZ(99.0);
  CHECK(f.step == 4);
  CHECK(f.time_ms == 4 * kMinute);
  CHECK(f.expected == Approx(10.0));
  CHECK(f.upper == Approx(10.0 + z));
  CHECK(f.lower == Approx(10.0 - z));
  CHECK(f.score == Approx(20.0));
  model::State clipped = before;
  model::Update(model::ModelSpec{}, model::Params{0.5, 0, 0, 1}, clipped, f.upper);
  CHECK(h.engine->View(0).state == clipped);
}

TEST_CASE("an alert is raised after breach_run flags and cleared after clear_run in-band points", "[stream]") {
  Harness h({Profile("*")});
  for (int k = 0; k < 4; ++k) h.Feed("s", k, 10.0);
  h.Feed("s", 4, 40.0);
  h.Feed("s", 5, 45.0);
  EngineBatch b = h.engine->TakeBatch();
  REQUIRE(b.alerts.size() == 1);
  CHECK(b.alerts[0].kind == AlertKind::kRaised);
  CHECK(b.alerts[0].step == 5);
  CHECK(h.engine->View(0).alert_active);
  const double level = h.engine->View(0).state.level;
  h.Feed("s", 6, level);
  h.Feed("s", 7, level);
  b = h.engine->TakeBatch();
  REQUIRE(b.alerts.size() == 1);
  CHECK(b.alerts[0].kind == AlertKind::kCleared);
  CHECK(b.alerts[0].step == 7);
}

TEST_CASE("late and duplicate records are dead-lettered with the reason", "[stream]") {
  Harness h({Profile("*")});
  h.Feed("s", 5, 1.0);
  h.Feed("s", 5, 1.0);
  h.Feed("s", 3, 1.0);
  EngineBatch b = h.engine->TakeBatch();
  REQUIRE(b.dead_letters.size() == 2);
  CHECK(b.dead_letters[0].reason == "duplicate: series 's' already has a value for step 5");
  CHECK(b.dead_letters[1].reason.rfind("late: time 180000 of series 's' falls in step 3", 0) == 0);
  CHECK(b.observations == 1);
}

TEST_CASE("gap steps advance the state by prediction and widen nothing they should not", "[stream]") {
  Harness h({Profile("*")});
  for (int k = 0; k < 4; ++k) h.Feed("s", k, 10.0 + k);
  h.engine->TakeBatch();
  const int64_t steps_before = h.engine->View(0).state.steps;
  h.Feed("s", 7, 13.0);  // steps 4, 5, 6 missing
  EngineBatch b = h.engine->TakeBatch();
  REQUIRE(b.history.size() == 4);
  CHECK(std::isnan(b.history[0].value));
  CHECK(b.history[3].value == 13.0);
  CHECK(h.engine->View(0).state.steps == steps_before + 4);
  CHECK(h.engine->View(0).last_step == 7);
}

TEST_CASE("a non-positive value for a multiplicative form is dead-lettered and queues an additive refit",
          "[stream]") {
  Harness h({Profile("*")});
  h.chooser.spec = model::ModelSpec{model::ErrorType::kMultiplicative, model::TrendType::kNone,
                                    model::SeasonType::kNone, 1};
  h.chooser.sigma2 = 0.01;
  for (int k = 0; k < 4; ++k) h.Feed("s", k, 10.0);
  h.engine->TakeBatch();
  h.Feed("s", 4, 0.0);
  h.Feed("s", 5, -1.0);
  EngineBatch b = h.engine->TakeBatch();
  REQUIRE(b.dead_letters.size() == 2);
  CHECK(b.dead_letters[0].reason ==
        "value 0 <= 0 for series 's' with multiplicative form ETS(M,N,N); series queued for an additive refit");
  CHECK(h.engine->TakeRefitRequests() == std::vector<SeriesId>{0});
  CHECK(h.engine->TakeRefitRequests().empty());  // queued once

  // The refit installs an additive model and replays the given history.
  Result<ModelChoice> additive = h.chooser({}, SeriesRules{}, true);
  REQUIRE(additive.ok());
  additive->initial.level = 10.0;
  std::vector<double> history = {10, 10, 10, 10};
  REQUIRE(h.engine->InstallModel(0, *additive, history, "additive refit").ok());
  CHECK(h.engine->View(0).form->error == model::ErrorType::kAdditive);
  h.Feed("s", 6, 0.0);
  CHECK(h.engine->TakeBatch().dead_letters.empty());
}

TEST_CASE("a failed fit is recorded and retried after more points", "[stream]") {
  Harness h({Profile("*")});
  h.chooser.fail = true;
  for (int k = 0; k < 4; ++k) h.Feed("s", k, 10.0);
  EngineBatch b = h.engine->TakeBatch();
  REQUIRE(b.events.back().kind == EventKind::kFitFailed);
  CHECK(b.events.back().detail.find("test chooser told to fail") != std::string::npos);
  h.chooser.fail = false;
  h.Feed("s", 4, 10.0);  // retry needs warmup / 2 = 2 more points
  CHECK(h.engine->View(0).warming_up);
  h.Feed("s", 5, 10.0);
  CHECK_FALSE(h.engine->View(0).warming_up);
  CHECK(h.chooser.calls == 2);
}

TEST_CASE("a restored checkpoint continues bit-identically to an uninterrupted engine", "[stream]") {
  std::vector<SeriesRules> profiles = {Profile("count-*", kMinute), Profile("*", kMinute)};
  profiles[0].aggregate = AggregateKind::kCount;
  auto feed = [](Harness& h, int from, int to) {
    for (int k = from; k < to; ++k) {
      h.Feed("level", k, 100.0 + std::sin(k) * 3.0 + (k == 20 ? 40.0 : 0.0));
      if (k % 3 != 0) h.Feed("warm", k * 50, 1.0 + k);  // sparse: still warming at the cut
      for (int e = 0; e < 1 + k % 4; ++e)
        h.engine->Observe("count-a", k * kMinute + e * 1000, 1.0, "c", 0, k);
    }
  };
  Harness whole(profiles);
  feed(whole, 0, 40);

  Harness first(profiles);
  feed(first, 0, 25);
  // What the store would hold: every history point of the first run, per series.
  EngineBatch stored = first.engine->TakeBatch();
  Harness second(profiles);
  for (SeriesId id = 0; id < first.engine->series_count(); ++id) {
    std::vector<double> history;
    for (const HistoryPoint& p : stored.history)
      if (p.series == id) history.push_back(p.value);
    REQUIRE(second.engine
                ->RestoreSeries(first.engine->SeriesName(id), first.engine->EncodeCheckpoint(id),
                                [&]() -> Result<std::vector<double>> { return history; })
                .ok());
  }
  CHECK(second.engine->TakeBatch().empty());  // restoring is not new work
  feed(second, 25, 40);
  // Every restored series that received records is dirty again: its new state will be committed.
  EngineBatch after = second.engine->TakeBatch();
  for (const char* name : {"level", "count-a"}) {
    INFO(name);
    CHECK(std::count(after.dirty.begin(), after.dirty.end(), *second.engine->FindSeries(name)) == 1);
  }
  REQUIRE(second.engine->series_count() == whole.engine->series_count());
  for (SeriesId id = 0; id < whole.engine->series_count(); ++id) {
    SeriesView a = whole.engine->View(id);
    SeriesView b = second.engine->View(*second.engine->FindSeries(a.name));
    INFO(a.name);
    CHECK(a.state == b.state);
    CHECK(a.last_step == b.last_step);
    CHECK(a.warming_up == b.warming_up);
    CHECK(a.alert_active == b.alert_active);
  }
}

TEST_CASE("a corrupt checkpoint is refused with the series named", "[stream]") {
  Harness h({Profile("*")});
  Status s = h.engine->RestoreSeries("queue-1", "\x01\x02", [] { return Result<std::vector<double>>(std::vector<double>{}); });
  CHECK(s.code() == StatusCode::kCorruption);
  CHECK(s.message().find("queue-1") != std::string::npos);
}

TEST_CASE("invalid profiles fail at construction naming the profile", "[stream]") {
  SeriesRules bad = Profile("q*");
  bad.band_level = 1.0;
  EngineOptions options;
  options.profiles = {bad};
  ManualClock clock;
  CHECK_THROWS_WITH(Engine(options, [](auto, auto&, bool) -> Result<ModelChoice> { return Status::Internal("x"); },
                           &clock),
                    "profile[0] ('q*'): band level must be in (0, 1)");
}

}  // namespace plimsoll::stream

namespace plimsoll::stream {

TEST_CASE("ObserveBatch has exactly the effect of Observe record by record", "[stream]") {
  // Many series in shuffled order, with new series, late and duplicate steps, non-finite values,
  // unmatched names and spikes, fed one record at a time and in blocks of varying size.
  std::vector<SeriesRules> profiles = {Profile("q-*", kMinute, 4)};
  Harness single(profiles), batched(profiles);
  struct Rec {
    std::string series;
    int64_t time_ms;
    double value;
    std::string raw;
  };
  std::vector<Rec> recs;
  uint64_t lcg = 12345;
  const auto next = [&] { return (lcg = lcg * 6364136223846793005ULL + 1442695040888963407ULL) >> 33; };
  for (int k = 0; k < 40; ++k) {
    for (int j = 0; j < 150; ++j) {
      const int i = static_cast<int>(next() % 200);
      const std::string name = (i % 41 == 0 ? "other-" : "q-") + std::to_string(i);
      double value = 50.0 + i + 3.0 * std::sin(0.2 * k + i) + (next() % 29 == 0 ? 40.0 : 0.0);
      if (next() % 211 == 0) value = std::nan("");
      const int64_t step = k - (next() % 17 == 0 ? 1 : 0);  // some late or duplicate
      recs.push_back({name, step * kMinute + static_cast<int64_t>(next() % 1000), value,
                      name + "@" + std::to_string(recs.size())});
    }
  }
  for (size_t r = 0; r < recs.size(); ++r)
    single.engine->Observe(recs[r].series, recs[r].time_ms, recs[r].value, recs[r].raw, 0, static_cast<int64_t>(r));
  std::vector<Observation> block;
  for (size_t r = 0; r < recs.size();) {
    const size_t n = std::min(recs.size() - r, static_cast<size_t>(1 + next() % 300));
    block.clear();
    for (size_t k = r; k < r + n; ++k)
      block.push_back({recs[k].series, recs[k].time_ms, recs[k].value, recs[k].raw, 0, static_cast<int64_t>(k)});
    batched.engine->ObserveBatch(block);
    r += n;
  }
  const EngineBatch a = single.engine->TakeBatch();
  const EngineBatch b = batched.engine->TakeBatch();
  REQUIRE(a.observations == b.observations);
  REQUIRE(a.flags.size() == b.flags.size());
  REQUIRE(!a.flags.empty());
  for (size_t i = 0; i < a.flags.size(); ++i) {
    CHECK(a.flags[i].series == b.flags[i].series);
    CHECK(a.flags[i].step == b.flags[i].step);
    CHECK(a.flags[i].expected == b.flags[i].expected);
    CHECK(a.flags[i].lower == b.flags[i].lower);
    CHECK(a.flags[i].score == b.flags[i].score);
  }
  REQUIRE(a.alerts.size() == b.alerts.size());
  REQUIRE(a.history.size() == b.history.size());
  for (size_t i = 0; i < a.history.size(); ++i) {
    CHECK(a.history[i].series == b.history[i].series);
    CHECK(a.history[i].step == b.history[i].step);
  }
  REQUIRE(a.dead_letters.size() == b.dead_letters.size());
  REQUIRE(a.dead_letters.size() > 20);
  for (size_t i = 0; i < a.dead_letters.size(); ++i) {
    CHECK(a.dead_letters[i].raw == b.dead_letters[i].raw);
    CHECK(a.dead_letters[i].reason == b.dead_letters[i].reason);
    CHECK(a.dead_letters[i].offset == b.dead_letters[i].offset);
  }
  REQUIRE(a.events.size() == b.events.size());
  CHECK(a.dirty == b.dirty);
  REQUIRE(single.engine->series_count() == batched.engine->series_count());
  for (SeriesId id = 0; id < single.engine->series_count(); ++id) {
    INFO(single.engine->SeriesName(id));
    CHECK(single.engine->SeriesName(id) == batched.engine->SeriesName(id));
    CHECK(single.engine->EncodeCheckpoint(id) == batched.engine->EncodeCheckpoint(id));
  }
  CHECK(single.engine->counters().flags == batched.engine->counters().flags);
  CHECK(single.engine->counters().dead_letters == batched.engine->counters().dead_letters);
}

}  // namespace plimsoll::stream
