// Background refits inside the daemon, on a real SQLite file: a level shift raises an alert, the
// alert-triggered refit follows the shift and the alert clears; explicit requests and a changed
// profile trigger refits on the next run.
#include <catch2/catch.hpp>
#include <spdlog/spdlog.h>

#include <atomic>
#include <chrono>
#include <functional>
#include <random>
#include <thread>

#include "plimsoll/fit/fit.h"
#include "plimsoll/refit/refit.h"
#include "plimsoll/store/store.h"
#include "plimsoll/stream/config.h"
#include "plimsoll/stream/daemon.h"
#include "plimsoll/stream/fit_chooser.h"
#include "stream/one_stream_source_util.h"
#include "refit/refit_test_util.h"

namespace plimsoll::refit {
namespace {

using testing::kMinute;

// A live-like feed: one record per Poll; past `gate` it holds back (empty polls) until
// `open()` says so, the way a live stream keeps arriving while a refit runs.
class GatedSource final : public stream::testing::OneStreamSource {
 public:
  GatedSource(std::vector<std::string> lines, size_t gate, std::function<bool()> open)
      : OneStreamSource("memory:feed"), lines_(std::move(lines)), gate_(gate), open_(std::move(open)) {}
  Status Poll(std::vector<stream::RawRecord>& out, size_t max_records, int timeout_ms) override {
    out.clear();
    if (next_ == lines_.size()) return Status::Aborted("end of feed");
    if (max_records == 0) return Status::Ok();
    if (next_ >= gate_ && !open_()) {
      // Bounded: a service that never installs fails the test's checks instead of hanging it.
      if (++held_polls_ < 6'000) {
        std::this_thread::sleep_for(std::chrono::milliseconds(std::max(1, timeout_ms / 4)));
        return Status::Ok();
      }
    }
    const std::string& line = lines_[next_];
    out.push_back({{}, line, 0, static_cast<int64_t>(next_), static_cast<int64_t>(next_) + 1, -1});
    ++next_;
    return Status::Ok();
  }

 private:
  std::vector<std::string> lines_;
  size_t gate_;
  std::function<bool()> open_;
  size_t next_ = 0;
  int held_polls_ = 0;
};

constexpr int64_t kShiftAt = 200;
constexpr double kShift = 30.0;

std::vector<std::string> Lines(const std::string& series, int64_t from, int64_t to) {
  std::mt19937_64 rng(17);
  std::normal_distribution<double> noise(0.0, 1.0);
  std::vector<std::string> out;
  for (int64_t k = 0; k < to; ++k) {
    const double v = 100.0 + noise(rng) + (k >= kShiftAt ? kShift : 0.0);
    if (k < from) continue;
    // "time" in seconds since the epoch.
    out.push_back("{\"series\":\"" + series + "\",\"time\":" + std::to_string(k * kMinute / 1000) +
                  ",\"value\":" + std::to_string(v) + "}");
  }
  return out;
}

std::string ConfigText(const std::string& db, const std::string& match) {
  return "[store]\npath = \"" + db +
         "\"\ncommit_ms = 5\n[band]\nbreach_run = 3\nclear_run = 5\n[refit]\nthreads = 1\nmax_age = \"none\"\n"
         "background_warmup = true\n"
         "[[profile]]\nmatch = \"" + match + "\"\ninterval = \"1m\"\nperiod = 1\nwarmup = 40\nhistory = 1000\n";
}

// One daemon run over `lines`, wired like `watch` (src/cli/daemon_setup.cc). Past `gate` records
// the feed waits until `open(counters)` holds.
void RunDaemon(const std::string& config_text, std::vector<std::string> lines, size_t gate,
               const std::function<bool(const RefitCounters&)>& open) {
  Result<stream::Config> config = stream::ParseConfig(config_text, "test");
  REQUIRE(config.ok());
  store::StoreOptions store_options;
  store_options.path = config->store.path;
  Result<std::unique_ptr<store::Store>> store = store::Store::Open(store_options);
  REQUIRE(store.ok());
  RefitServiceOptions options = RefitServiceOptionsFromConfig(*config);
  options.request_poll_ms = 1;
  auto service = MakeRefitService(options, stream::MakeFitChooser(fit::FitOptions{}),
                                  StoreHistoryReaders(store_options), SystemClock());
  stream::DaemonOptions daemon_options = stream::DaemonOptionsFromConfig(*config);
  Result<std::unique_ptr<stream::Daemon>> daemon =
      stream::Daemon::Open(daemon_options, stream::EngineOptionsFromConfig(*config),
                           stream::MakeFitChooser(fit::FitOptions{}), std::move(store).value(), SystemClock(),
                           std::move(service));
  REQUIRE(daemon.ok());
  stream::Daemon& d = **daemon;
  GatedSource source(std::move(lines), gate,
                     [&] { return open(CountersOf(*d.refits())); });
  stream::RecordDecoder decoder;
  std::atomic<bool> stop{false};
  REQUIRE(d.Run(source, decoder, stop).ok());
}

struct Stored {
  std::vector<store::EventRecord> events;
  std::vector<store::AlertRecord> alerts;  // oldest first
  store::StoredSeries series;
  bool Has(const std::string& kind, const std::string& text) const {
    for (const store::EventRecord& e : events)
      if (e.kind == kind && e.detail.find(text) != std::string::npos) return true;
    return false;
  }
};

Stored Read(const std::string& db, const std::string& series) {
  store::StoreOptions options;
  options.path = db;
  options.read_only = true;
  auto store = store::Store::Open(options);
  REQUIRE(store.ok());
  Stored out;
  auto events = (*store)->RecentEvents(series, 1000);
  REQUIRE(events.ok());
  out.events = *events;
  auto alerts = (*store)->RecentAlerts(series, 1000);
  REQUIRE(alerts.ok());
  out.alerts.assign(alerts->rbegin(), alerts->rend());
  auto s = (*store)->GetSeries(series);
  REQUIRE(s.ok());
  out.series = *s;
  return out;
}

}  // namespace

TEST_CASE("a level shift raises an alert, the refit follows the shift and the alert clears", "[refit]") {
  spdlog::set_level(spdlog::level::warn);
  testing::TempDir dir;
  const std::string db = dir.File("plimsoll.db");
  // The feed holds back 30 steps after the shift until the alert-triggered refit is in.
  RunDaemon(ConfigText(db, "line-*"), Lines("line-1", 0, 320), kShiftAt + 30,
            [](const RefitCounters& c) { return c.installed >= 1; });
  const Stored stored = Read(db, "line-1");
  REQUIRE(stored.alerts.size() >= 2);
  CHECK(stored.alerts[0].kind == store::AlertKind::kRaised);
  CHECK(stored.alerts[0].step >= kShiftAt);
  CHECK(stored.alerts.back().kind == store::AlertKind::kCleared);
  CHECK(stored.Has("model_changed", "\"trigger\":\"alert\""));
  REQUIRE(stored.series.model.has_value());
  CHECK(stored.series.model->reason == "refit: alert");
  REQUIRE(stored.series.state.has_value());
  Result<stream::CheckpointView> checkpoint = stream::DecodeCheckpoint(stored.series.state->encoded);
  REQUIRE(checkpoint.ok());
  CHECK_FALSE(checkpoint->alert_active);
  CHECK(std::abs(checkpoint->state.level - (100.0 + kShift)) < 3.0);  // follows the new level
}

TEST_CASE("an explicit request and a changed profile each refit on the next run", "[refit]") {
  spdlog::set_level(spdlog::level::warn);
  testing::TempDir dir;
  const std::string db = dir.File("plimsoll.db");
  RunDaemon(ConfigText(db, "line-*"), Lines("line-1", 0, 100), 50,
            [](const RefitCounters& c) { return c.warmups >= 1; });
  {
    store::StoreOptions options;
    options.path = db;
    auto store = store::Store::Open(options);
    REQUIRE(store.ok());
    REQUIRE((*store)->AddRefitRequest("line-?", "test request", 1).ok());
  }
  RunDaemon(ConfigText(db, "line-*"), Lines("line-1", 100, 140), 10,
            [](const RefitCounters& c) { return c.installed >= 1; });
  CHECK(Read(db, "line-1").Has("model_changed", "\"trigger\":\"request\""));
  // Same series, now matched by another profile: the stored model was chosen under the old one.
  RunDaemon(ConfigText(db, "line-[0-9]"), Lines("line-1", 140, 180), 10,
            [](const RefitCounters& c) { return c.installed >= 1; });
  CHECK(Read(db, "line-1").Has("model_changed", "\"trigger\":\"profile_change\""));
  // The store now records the new profile: the next start does not refit for it again.
  RunDaemon(ConfigText(db, "line-[0-9]"), Lines("line-1", 180, 200), 20, [](const RefitCounters&) { return true; });
  size_t profile_refits = 0;
  for (const store::EventRecord& e : Read(db, "line-1").events)
    profile_refits += e.detail.find("\"trigger\":\"profile_change\"") != std::string::npos ? 1 : 0;
  CHECK(profile_refits == 1);
  CHECK(Read(db, "line-1").series.series.profile == "line-[0-9]");
}

}  // namespace plimsoll::refit
