// Group commits between checkpoints: a restart from ANY committed transaction (what a kill -9
// leaves) must end with the states, flags, alerts, events and dead letters of an uninterrupted run:
// states bit-identical, nothing duplicated, nothing missing. Committed snapshots are taken with
// VACUUM INTO from a second connection while the daemon runs.
#include <sqlite3.h>
#include <unistd.h>

#include <catch2/catch.hpp>
#include <algorithm>
#include <atomic>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <map>
#include <memory>
#include <set>
#include <stdexcept>
#include <string>
#include <tuple>
#include <vector>

#include "plimsoll/base/clock.h"
#include "plimsoll/store/store.h"
#include "plimsoll/stream/daemon.h"
#include "plimsoll/stream/decode.h"
#include "plimsoll/stream/engine.h"
#include "plimsoll/stream/source.h"
#include "stream/level_choice_util.h"
#include "stream/one_stream_source_util.h"

namespace plimsoll::stream {
namespace {

namespace fs = std::filesystem;

constexpr int kSeries = 300;
constexpr int kRounds = 40;
constexpr int64_t kT0 = 1'767'225'600;  // 2026-01-01T00:00:00Z, seconds

// CSV lines for kSeries minute series over kRounds minutes, with spikes (flags, alerts), a few
// malformed lines and a duplicate (dead letters). Offsets are byte offsets, as for a file.
struct Feed {
  std::string text;
  std::vector<std::pair<int64_t, int64_t>> lines;  // (offset, length)
};

Feed MakeFeed() {
  Feed feed;
  char line[96];
  for (int k = 0; k < kRounds; ++k) {
    for (int s = 0; s < kSeries; ++s) {
      const int i = (s * 7 + k * 13) % kSeries;  // a different order every round
      double value = 100.0 + i + 5.0 * std::sin(0.3 * k + i);
      if (k > 10 && (i + k) % 37 == 0) value += 80.0;  // spikes
      if (k > 20 && i % 50 == 3 && k < 26) value += 90.0;  // runs of spikes: alerts
      std::snprintf(line, sizeof line, "s-%03d,%lld,%.4f", i, static_cast<long long>(kT0 + 60LL * k), value);
      std::string text = line;
      if (k == 15 && s % 97 == 0) text = "s-" + std::to_string(i) + ",not-a-time,1";
      if (k == 16 && s == 11) text = "{\"series\":\"s-" + std::to_string(i) + "\",\"time\":";  // cut-off JSON
      feed.lines.emplace_back(static_cast<int64_t>(feed.text.size()), static_cast<int64_t>(text.size()));
      feed.text += text + "\n";
      if (k == 30 && s == 5) {  // the same record again: a duplicate step
        feed.lines.emplace_back(static_cast<int64_t>(feed.text.size()), static_cast<int64_t>(text.size()));
        feed.text += text + "\n";
      }
    }
  }
  feed.text.append(kRecordPadding, '\0');  // every line is followed by readable bytes (PayloadsPadded)
  return feed;
}

class FeedSource final : public testing::OneStreamSource {
 public:
  FeedSource(const Feed& feed, int64_t from_offset, bool padded = false)
      : OneStreamSource("feed"), feed_(feed), padded_(padded) {
    while (next_ < feed_.lines.size() && feed_.lines[next_].first < from_offset) ++next_;
  }
  Status Poll(std::vector<RawRecord>& out, size_t max_records, int) override {
    out.clear();
    if (next_ == feed_.lines.size()) return Status::Aborted("end of feed");
    for (size_t end = std::min(feed_.lines.size(), next_ + std::min<size_t>(max_records, 64)); next_ < end; ++next_) {
      const auto [offset, length] = feed_.lines[next_];
      out.push_back({{}, std::string_view(feed_.text).substr(offset, length), 0, offset, offset + length + 1, -1});
    }
    return Status::Ok();
  }
  bool PayloadsPadded() const override { return padded_; }

 private:
  const Feed& feed_;
  const bool padded_;
  size_t next_ = 0;
};

// A fresh directory under the system's temp dir, removed with its contents at scope end.
class ScratchDir {
 public:
  explicit ScratchDir(const std::string& tag)
      : path_(fs::temp_directory_path() / ("plimsoll-" + tag + "-test-" + std::to_string(::getpid()))) {
    fs::remove_all(path_);
    fs::create_directories(path_);
  }
  ~ScratchDir() {
    std::error_code ignored;
    fs::remove_all(path_, ignored);
  }
  ScratchDir(const ScratchDir&) = delete;
  ScratchDir& operator=(const ScratchDir&) = delete;
  const fs::path& path() const { return path_; }

 private:
  fs::path path_;
};

Result<ModelChoice> Choose(std::span<const double> history, const SeriesRules&, bool) {
  return testing::LevelChoice(history, 0.3, 16.0);
}

EngineOptions Profiles() {
  SeriesRules r;
  r.match = "s-*";
  r.interval_ms = 60'000;
  r.warmup = 12;  // still warming up at the first checkpoint (8 records per series): restore rebuilds the buffer
  r.history = 50;
  r.breach_run = 2;
  r.breach_window = 2;
  r.clear_run = 2;
  EngineOptions o;
  o.profiles.push_back(r);
  return o;
}

DaemonOptions Options() {
  DaemonOptions o;
  o.commit_records = 200;  // many group commits (input waits for each) ...
  o.max_uncommitted_records = 300;
  o.commit_ms = 1'000'000;
  o.poll_records = 64;
  o.checkpoint_ms = 1'000'000'000;  // ... few checkpoints: one per 8 records per changed series
  o.checkpoint_records_per_state = 8;
  o.history_restore_points = 50;
  return o;
}

// Takes a snapshot of the committed store after every few durable batches.
class SnapshotSink final : public OutputSink {
 public:
  SnapshotSink(std::string db, fs::path dir) : db_(std::move(db)), dir_(std::move(dir)) {}
  Status Publish(const store::CommitBatch&) override {
    if (++published_ % 2 != 0) return Status::Ok();
    sqlite3* conn = nullptr;
    if (sqlite3_open_v2(db_.c_str(), &conn, SQLITE_OPEN_READONLY, nullptr) != SQLITE_OK) {
      sqlite3_close(conn);
      return Status::IoError("snapshot: cannot open the store");
    }
    const std::string target = (dir_ / ("snap-" + std::to_string(snapshots.size()) + ".db")).string();
    const std::string sql = "VACUUM INTO '" + target + "'";
    const int rc = sqlite3_exec(conn, sql.c_str(), nullptr, nullptr, nullptr);
    sqlite3_close(conn);
    if (rc != SQLITE_OK) return Status::IoError("snapshot: VACUUM INTO failed");
    snapshots.push_back(target);
    return Status::Ok();
  }
  std::vector<std::string> snapshots;

 private:
  std::string db_;
  fs::path dir_;
  int published_ = 0;
};

struct Outcome {
  std::map<std::string, std::pair<int64_t, std::string>> states;
  std::set<std::tuple<std::string, int64_t, double>> flags;
  std::set<std::tuple<std::string, int64_t, int>> alerts;
  std::multiset<std::tuple<std::string, std::string, std::string>> events;  // series, kind, detail
  std::multiset<std::tuple<int64_t, std::string>> dead_letters;             // offset, reason
  size_t flag_rows = 0, alert_rows = 0;
  size_t history_ahead = 0;  // series whose stored history goes past their stored state
};

Outcome Read(const std::string& db) {
  store::StoreOptions options;
  options.path = db;
  options.read_only = true;
  Result<std::unique_ptr<store::Store>> opened = store::Store::Open(options);
  REQUIRE(opened.ok());
  store::Store& st = **opened;
  Outcome out;
  REQUIRE(st.ForEachSeries([&](const store::StoredSeries& s) {
              if (s.state) out.states[s.series.name] = {s.state->step, s.state->encoded};
              return Status::Ok();
            }).ok());
  for (const auto& [name, state] : out.states) {
    Result<store::HistorySlice> newest = st.HistoryTail(name, 1);
    REQUIRE(newest.ok());
    if (!newest->values.empty() && newest->first_step > state.first) ++out.history_ahead;
  }
  Result<std::vector<store::FlagRecord>> flags = st.RecentFlags("", 1'000'000);
  REQUIRE(flags.ok());
  for (const store::FlagRecord& f : *flags) out.flags.insert({f.series, f.step, f.value});
  out.flag_rows = flags->size();
  Result<std::vector<store::AlertRecord>> alerts = st.RecentAlerts("", 1'000'000);
  REQUIRE(alerts.ok());
  for (const store::AlertRecord& a : *alerts) out.alerts.insert({a.series, a.step, static_cast<int>(a.kind)});
  out.alert_rows = alerts->size();
  Result<std::vector<store::EventRecord>> events = st.RecentEvents("", 1'000'000);
  REQUIRE(events.ok());
  for (const store::EventRecord& e : *events) out.events.insert({e.series, e.kind, e.detail});
  Result<std::vector<store::StoredDeadLetter>> dead = st.RecentDeadLetters(1'000'000);
  REQUIRE(dead.ok());
  for (const store::StoredDeadLetter& d : *dead) out.dead_letters.insert({d.record.offset, d.record.reason});
  return out;
}

// Runs the daemon on `db` from its stored position to the end of the feed.
void RunToEnd(const std::string& db, const Feed& feed, OutputSink* sink, bool padded = false) {
  store::StoreOptions options;
  options.path = db;
  Result<std::unique_ptr<store::Store>> opened = store::Store::Open(options);
  REQUIRE(opened.ok());
  ManualClock clock(1'767'225'600'000, 1'000'000'000);
  Result<std::unique_ptr<Daemon>> daemon =
      Daemon::Open(Options(), Profiles(), Choose, std::move(opened).value(), &clock);
  REQUIRE(daemon.ok());
  const std::optional<int64_t> from = (*daemon)->Positions()(StreamId{"feed", 0});
  FeedSource source(feed, from.value_or(0), padded);
  RecordDecoder decoder;
  std::atomic<bool> stop{false};
  REQUIRE((*daemon)->Run(source, decoder, stop, sink).ok());
}

}  // namespace

TEST_CASE("a restart from any committed transaction between checkpoints ends as an uninterrupted run",
          "[stream][daemon]") {
  const ScratchDir scratch("checkpoint");
  const fs::path& dir = scratch.path();
  const Feed feed = MakeFeed();

  const std::string reference_db = (dir / "reference.db").string();
  SnapshotSink sink(reference_db, dir);
  RunToEnd(reference_db, feed, &sink);
  const Outcome reference = Read(reference_db);
  REQUIRE(reference.states.size() == kSeries);
  REQUIRE(!reference.flags.empty());
  REQUIRE(!reference.alerts.empty());
  REQUIRE(reference.dead_letters.size() >= 4);  // malformed times and the duplicate
  CHECK(reference.flag_rows == reference.flags.size());
  REQUIRE(sink.snapshots.size() >= 10);

  // Some snapshots must fall between checkpoints: history durable beyond the stored states.
  int between = 0, between_warming = 0;
  for (const std::string& snapshot : sink.snapshots) {
    INFO(snapshot);
    {
      // Count cuts between checkpoints, and among them cuts where series still warm up (their
      // buffer is rebuilt from history, which then runs ahead of the checkpoint).
      const Outcome cut = Read(snapshot);
      between += cut.history_ahead > 0 ? 1 : 0;
      size_t warming = 0;
      for (const auto& [name, st] : cut.states) warming += DecodeCheckpoint(st.second)->warming_up ? 1 : 0;
      between_warming += cut.history_ahead > 0 && warming > 0 ? 1 : 0;
    }
    RunToEnd(snapshot, feed, nullptr);
    const Outcome got = Read(snapshot);
    REQUIRE(got.states.size() == reference.states.size());
    for (const auto& [name, state] : reference.states) {
      INFO(name);
      REQUIRE(got.states.count(name) == 1);
      CHECK(got.states.at(name).first == state.first);
      CHECK(got.states.at(name).second == state.second);  // bit-identical checkpoint bytes
    }
    CHECK(got.flags == reference.flags);
    CHECK(got.flag_rows == got.flags.size());
    CHECK(got.alerts == reference.alerts);
    CHECK(got.alert_rows == got.alerts.size());
    CHECK(got.events == reference.events);              // none twice, none missing
    CHECK(got.dead_letters == reference.dead_letters);  // none twice, none missing
  }
  CHECK(between >= 2);
  CHECK(between_warming >= 1);
}

TEST_CASE("records decoded in place from a padded source end as copied ones, bad records included",
          "[stream][daemon]") {
  const ScratchDir scratch("padded");
  const fs::path& dir = scratch.path();
  const Feed feed = MakeFeed();
  const std::string copied_db = (dir / "copied.db").string(), in_place_db = (dir / "in-place.db").string();
  RunToEnd(copied_db, feed, nullptr, /*padded=*/false);
  RunToEnd(in_place_db, feed, nullptr, /*padded=*/true);
  const Outcome copied = Read(copied_db), in_place = Read(in_place_db);
  REQUIRE(copied.states.size() == kSeries);
  CHECK(in_place.states == copied.states);
  CHECK(in_place.flags == copied.flags);
  CHECK(in_place.alerts == copied.alerts);
  CHECK(in_place.events == copied.events);
  // Malformed times, the cut-off JSON object and the duplicate: the same dead letters, same
  // reasons (that a reason never depends on the bytes after a record is decode_test's).
  REQUIRE(copied.dead_letters.size() >= 5);
  CHECK(in_place.dead_letters == copied.dead_letters);
}

TEST_CASE("the last commits are made while the writer still retries an earlier one", "[stream][daemon]") {
  // At the end of input the daemon submits the unread rest, then the checkpoint: two batches in a
  // row while the writer may still be retrying an earlier one. Each must wait for the slot while
  // taking what became durable (a version that did not waited forever here).
  const ScratchDir scratch("drain");
  const fs::path& dir = scratch.path();
  Feed feed;
  for (int k = 0; k < 20; ++k)
    for (int i = 0; i < 5; ++i) {
      const std::string text = "s-00" + std::to_string(i) + "," + std::to_string(kT0 + 60LL * k) + "," +
                               std::to_string(100 + i + k % 3);
      feed.lines.emplace_back(static_cast<int64_t>(feed.text.size()), static_cast<int64_t>(text.size()));
      feed.text += text + "\n";
    }
  store::StoreOptions store_options;
  store_options.path = (dir / "store.db").string();
  Result<std::unique_ptr<store::Store>> opened = store::Store::Open(store_options);
  REQUIRE(opened.ok());
  // The first commit (the first poll's 64 records) fails once: the writer retries it after a
  // back-off, during which the rest of the input is read and the end reached.
  (*opened)->TEST_FailNextCommitAfterRows(1, Status::IoError("injected"));
  DaemonOptions options = Options();
  options.commit_records = 10;
  options.max_uncommitted_records = 1000;
  ManualClock clock(1'767'225'600'000, 1'000'000'000);
  Result<std::unique_ptr<Daemon>> daemon = Daemon::Open(options, Profiles(), Choose, std::move(opened).value(), &clock);
  REQUIRE(daemon.ok());
  FeedSource source(feed, 0);
  RecordDecoder decoder;
  std::atomic<bool> stop{false};
  REQUIRE((*daemon)->Run(source, decoder, stop).ok());
  CHECK((*daemon)->StoreCounters().commit_failures == 1);
  daemon->reset();
  const Outcome stored = Read((dir / "store.db").string());
  REQUIRE(stored.states.size() == 5);
  for (const auto& [name, state] : stored.states) CHECK(state.first == kT0 / 60 + 19);  // the last step's state
}

}  // namespace plimsoll::stream
