// The daemon's bucket clock end to end on a real SQLite file: a live source that delivers a
// backlog of a count feed hours behind the wall clock buckets it by the records' own times (no
// late dead letters, no zero-count steps in between), and once the feed falls silent the wall
// clock carries the buckets on as zero-count steps.
#include <catch2/catch.hpp>

#include <atomic>
#include <filesystem>
#include <string>
#include <vector>

#include "plimsoll/base/clock.h"
#include "plimsoll/fit/fit.h"
#include "plimsoll/store/store.h"
#include "plimsoll/stream/config.h"
#include "plimsoll/stream/daemon.h"
#include "plimsoll/stream/fit_chooser.h"
#include "stream/one_stream_source_util.h"

namespace plimsoll::stream {
namespace {

constexpr int64_t kMinuteMs = 60'000;
constexpr int64_t kHourMs = 60 * kMinuteMs;

// Delivers `lines` 50 per poll, then `idle_polls` empty polls; each poll moves the manual clock
// on by `poll_ms` (a live source waiting for data).
class BacklogSource final : public testing::OneStreamSource {
 public:
  BacklogSource(std::vector<std::string> lines, int idle_polls, int64_t idle_poll_ms, ManualClock& clock)
      : OneStreamSource("memory:backlog"), lines_(std::move(lines)), idle_polls_(idle_polls), idle_poll_ms_(idle_poll_ms), clock_(clock) {}
  Status Poll(std::vector<RawRecord>& out, size_t max_records, int) override {
    out.clear();
    if (next_ < lines_.size()) {
      clock_.AdvanceMillis(1);
      for (size_t n = 0; n < std::min<size_t>(50, max_records) && next_ < lines_.size(); ++n, ++next_) {
        const auto offset = static_cast<int64_t>(next_);
        out.push_back({{}, lines_[next_], 0, offset, offset + 1, -1});
      }
      return Status::Ok();
    }
    if (idle_polls_-- <= 0) return Status::Aborted("end of test feed");
    clock_.AdvanceMillis(idle_poll_ms_);
    return Status::Ok();
  }

 private:
  std::vector<std::string> lines_;
  int idle_polls_;
  int64_t idle_poll_ms_;
  ManualClock& clock_;
  size_t next_ = 0;
};

TEST_CASE("a live count feed's backlog is bucketed by record time and a silence by wall time", "[stream]") {
  const std::filesystem::path dir = std::filesystem::temp_directory_path() / "plimsoll-bucket-clock-test";
  std::filesystem::remove_all(dir);
  std::filesystem::create_directories(dir);
  Result<Config> config = ParseConfig("[store]\npath = \"" + (dir / "state.db").string() +
                                          "\"\ncommit_ms = 20\n[[profile]]\nmatch = \"*\"\ninterval = \"1m\"\n"
                                          "aggregate = \"count\"\nperiod = 1\nwarmup = 10000\nhistory = 10000\n",
                                      "test");
  REQUIRE(config.ok());
  DaemonOptions options = DaemonOptionsFromConfig(*config);
  options.event_time = false;  // a live source: stdin or Kafka
  store::StoreOptions store_options;
  store_options.path = config->store.path;
  Result<std::unique_ptr<store::Store>> store = store::Store::Open(store_options);
  REQUIRE(store.ok());

  // Wall clock at 12:00; the backlog holds 07:00-10:00, three events a minute (epoch ms of a
  // December day, so the decoder reads them as milliseconds).
  constexpr int64_t kDayMs = 1'796'083'200'000;  // 2026-12-01T00:00:00Z
  ManualClock clock(kDayMs + 12 * kHourMs, 0);
  std::vector<std::string> lines;
  const int64_t first_ms = kDayMs + 7 * kHourMs;
  for (int64_t t = first_ms; t < kDayMs + 10 * kHourMs; t += 20'000)
    lines.push_back("{\"series\":\"door-4\",\"time\":" + std::to_string(t) + ",\"value\":1}");
  // 15 minutes of silence after the backlog, one poll a second.
  BacklogSource source(std::move(lines), 15 * 60, 1000, clock);

  Result<std::unique_ptr<Daemon>> daemon = Daemon::Open(options, EngineOptionsFromConfig(*config),
                                                        MakeFitChooser(fit::FitOptions{}), std::move(store).value(),
                                                        &clock);
  REQUIRE(daemon.ok());
  RecordDecoder decoder;
  std::atomic<bool> stop{false};
  REQUIRE((*daemon)->Run(source, decoder, stop).ok());

  const Engine& engine = (*daemon)->engine();
  CHECK(engine.counters().dead_letters == 0);
  CHECK(engine.counters().observations == 540);
  const std::optional<SeriesId> id = engine.FindSeries("door-4");
  REQUIRE(id.has_value());
  // 180 backlog buckets (07:00-09:59) closed by their successors or the clock, then the silence:
  // the bucket clock ran on from 09:59:40 by 15 minutes, closing the 10:00-10:13 buckets at zero.
  const int64_t first_step = first_ms / kMinuteMs;
  const int64_t last_step = engine.SeriesPosition(*id).last_step;
  CHECK(last_step >= first_step + 179 + 10);
  CHECK(last_step <= first_step + 179 + 15);
  CHECK(engine.counters().steps == static_cast<uint64_t>(last_step - first_step + 1));
  std::filesystem::remove_all(dir);
}

}  // namespace
}  // namespace plimsoll::stream
