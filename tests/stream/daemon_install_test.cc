// A model swapped in by the refit service must reach the store in ONE commit together with the
// state it produced: a commit that held the new state without the model row (and the catch-up's
// flags) is what a kill -9 between two commits turned into lost flags.
#include <unistd.h>

#include <catch2/catch.hpp>
#include <atomic>
#include <cmath>
#include <filesystem>
#include <memory>
#include <string>
#include <vector>

#include "plimsoll/base/clock.h"
#include "plimsoll/store/store.h"
#include "plimsoll/stream/daemon.h"
#include "plimsoll/stream/decode.h"
#include "plimsoll/stream/engine.h"
#include "plimsoll/stream/refit_service.h"
#include "stream/level_choice_util.h"
#include "stream/one_stream_source_util.h"

namespace plimsoll::stream {
namespace {

namespace fs = std::filesystem;

constexpr double kOldAlpha = 0.3;
constexpr double kNewAlpha = 0.7;
constexpr int kRounds = 60;
constexpr int kSeries = 20;

Result<ModelChoice> Choose(std::span<const double> history, const SeriesRules&, bool) {
  return testing::LevelChoice(history, kOldAlpha, 4.0);
}

// Swaps a new alpha into series "s-00" at its fifth call, the way the refit service installs a
// finished fit: on the owner thread, inside OnBatch.
class SwapOnce final : public RefitService {
 public:
  void Start(Engine&, const std::vector<RestoredSeries>&) override {}
  size_t OnBatch(Engine& engine, const EngineBatch&, int64_t, std::vector<store::EventRecord>& events) override {
    if (++calls_ != 5) return 0;
    SeriesId id = 0;
    while (id < engine.series_count() && engine.SeriesName(id) != "s-00") ++id;
    REQUIRE(id < engine.series_count());
    const SeriesView view = engine.View(id);
    REQUIRE_FALSE(view.warming_up);
    ModelChoice c;
    c.spec = model::ModelSpec{};
    c.params.alpha = kNewAlpha;
    c.initial.level = view.state.level;
    c.initial.sigma2 = 4.0;
    const double last = view.state.level;  // replays one step from the current level
    REQUIRE(engine.InstallModel(id, c, std::span<const double>(&last, 1), "refit: test").ok());
    events.push_back({0, "s-00", "model_changed", "{}"});
    return 1;
  }
  void Stop(Engine&) override {}
  std::string Summary() const override { return {}; }

 private:
  int calls_ = 0;
};

class MinuteFeed final : public testing::OneStreamSource {
 public:
  MinuteFeed() : OneStreamSource("feed") {
    for (int k = 0; k < kRounds; ++k)
      for (int s = 0; s < kSeries; ++s) {
        const double value = 50.0 + s + 3.0 * std::sin(0.4 * k + s);
        lines_.push_back("s-" + std::string(s < 10 ? "0" : "") + std::to_string(s) + "," +
                         std::to_string(1'767'225'600 + 60 * k) + "," + std::to_string(value));
      }
  }
  Status Poll(std::vector<RawRecord>& out, size_t, int) override {
    out.clear();
    if (next_ == lines_.size()) return Status::Aborted("end of feed");
    for (size_t end = std::min(lines_.size(), next_ + 16); next_ < end; ++next_)
      out.push_back({{}, lines_[next_], 0, static_cast<int64_t>(next_), static_cast<int64_t>(next_ + 1), -1});
    return Status::Ok();
  }

 private:
  std::vector<std::string> lines_;
  size_t next_ = 0;
};

struct Recorder final : OutputSink {
  Status Publish(const store::CommitBatch& durable) override {
    batches.push_back(durable);
    return Status::Ok();
  }
  std::vector<store::CommitBatch> batches;
};

}  // namespace

TEST_CASE("a swapped-in model reaches the store in one checkpoint with the state it produced", "[stream][daemon]") {
  const fs::path dir = fs::temp_directory_path() / ("plimsoll-install-test-" + std::to_string(::getpid()));
  fs::remove_all(dir);
  fs::create_directories(dir);
  store::StoreOptions so;
  so.path = (dir / "install.db").string();
  Result<std::unique_ptr<store::Store>> opened = store::Store::Open(so);
  REQUIRE(opened.ok());

  SeriesRules rules;
  rules.match = "s-*";
  rules.interval_ms = 60'000;
  rules.warmup = 5;
  rules.history = 30;
  EngineOptions engine_options;
  engine_options.profiles.push_back(rules);
  DaemonOptions options;
  options.commit_records = 40;  // a group commit every two polls ...
  options.max_uncommitted_records = 80;
  options.commit_ms = 1'000'000;
  options.checkpoint_ms = 1'000'000'000;  // ... and, but for the install, no checkpoint until the end
  options.checkpoint_records_per_state = 0;
  ManualClock clock(1'767'225'600'000, 1'000'000'000);
  Result<std::unique_ptr<Daemon>> daemon = Daemon::Open(options, engine_options, Choose, std::move(opened).value(),
                                                        &clock, std::make_unique<SwapOnce>());
  REQUIRE(daemon.ok());
  MinuteFeed feed;
  RecordDecoder decoder;
  std::atomic<bool> stop{false};
  Recorder recorder;
  REQUIRE((*daemon)->Run(feed, decoder, stop, &recorder).ok());

  // The commit with the new model row holds the series' state under the new model; no earlier
  // commit holds a state of it under the new model.
  size_t model_commit = recorder.batches.size();
  for (size_t b = 0; b < recorder.batches.size() && model_commit == recorder.batches.size(); ++b)
    for (const store::ModelRecord& m : recorder.batches[b].models)
      if (m.series == "s-00" && m.reason == "refit: test") model_commit = b;
  REQUIRE(model_commit < recorder.batches.size());
  for (const store::ModelRecord& m : recorder.batches[model_commit].models) {
    if (m.series != "s-00") continue;
    CHECK(m.alpha == kNewAlpha);
    CHECK(m.previous_spec == "ETS(A,N,N)");  // what the outputs say it replaced
    CHECK(m.step > 5);
  }
  for (const store::ModelRecord& m : recorder.batches.front().models) CHECK(m.previous_spec.empty());
  bool state_with_model = false;
  for (size_t b = 0; b <= model_commit; ++b)
    for (const store::StateRecord& s : recorder.batches[b].states) {
      if (s.series != "s-00") continue;
      Result<CheckpointView> view = DecodeCheckpoint(s.encoded);
      REQUIRE(view.ok());
      if (view->warming_up) continue;
      INFO("commit " << b << " of " << recorder.batches.size() << ", model row in commit " << model_commit);
      CHECK(view->params.alpha == (b < model_commit ? kOldAlpha : kNewAlpha));
      state_with_model = state_with_model || b == model_commit;
    }
  CHECK(state_with_model);
  // The install's event waits for that checkpoint too.
  bool event_with_model = false;
  for (const store::EventRecord& e : recorder.batches[model_commit].events)
    event_with_model = event_with_model || e.kind == "model_changed";
  CHECK(event_with_model);
  fs::remove_all(dir);
}

}  // namespace plimsoll::stream
