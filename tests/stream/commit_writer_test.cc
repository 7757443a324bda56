#include "stream/commit_writer.h"

#include <catch2/catch.hpp>
#include <filesystem>
#include <chrono>
#include <string>
#include <thread>

namespace plimsoll::stream {
namespace {

namespace fs = std::filesystem;

struct TempStore {
  TempStore() {
    dir = fs::temp_directory_path() / ("plimsoll-writer-" + std::to_string(::getpid()) + "-" + std::to_string(++count));
    fs::remove_all(dir);
    fs::create_directories(dir);
  }
  ~TempStore() { fs::remove_all(dir); }
  std::unique_ptr<store::Store> Open(bool read_only = false, int64_t compact_points = 3'000'000,
                                     int checkpoint_pages = 4000) const {
    store::StoreOptions options;
    options.path = (dir / "w.db").string();
    options.read_only = read_only;
    options.history_compact_points = compact_points;
    options.wal_autocheckpoint_pages = checkpoint_pages;
    auto opened = store::Store::Open(options);
    REQUIRE(opened.ok());
    return std::move(opened).value();
  }
  fs::path dir;
  static inline int count = 0;
};

store::CommitBatch Batch(int i) {
  store::CommitBatch b;
  if (i == 0) b.series.push_back({"s", "*", 0});
  b.states.push_back({"s", i, i * 1000, "state-" + std::to_string(i)});
  b.positions.push_back({"file:/x", 0, i + 1});
  return b;
}

}  // namespace

TEST_CASE("the writer hands batches back in order once durable", "[stream]") {
  TempStore temp;
  CommitWriter writer(temp.Open(), SystemClock());
  std::vector<int64_t> durable_positions;
  for (int i = 0; i < 20; ++i) {
    writer.Submit(Batch(i));  // waits while the previous batch is in flight
    while (auto done = writer.TakeDurable()) durable_positions.push_back(done->positions[0].next_offset);
  }
  while (writer.busy()) {
    REQUIRE(writer.WaitDurable(5'000).ok());
    while (auto done = writer.TakeDurable()) durable_positions.push_back(done->positions[0].next_offset);
  }
  while (auto done = writer.TakeDurable()) durable_positions.push_back(done->positions[0].next_offset);
  REQUIRE(durable_positions.size() == 20);
  for (int i = 0; i < 20; ++i) CHECK(durable_positions[i] == i + 1);
  CHECK(writer.counters().batches.load() == 20);
  writer.Stop();
  auto reader = temp.Open(/*read_only=*/true);
  CHECK(reader->StoredPosition("file:/x", 0) == 20);
  CHECK(reader->GetSeries("s")->state->encoded == "state-19");
}

TEST_CASE("a failing commit is retried until it lands and never dropped", "[stream]") {
  TempStore temp;
  auto store = temp.Open();
  store->TEST_FailNextCommitAfterRows(1, Status::IoError("injected: disk full"));
  CommitWriter writer(std::move(store), SystemClock());
  writer.Submit(Batch(0));
  REQUIRE(writer.WaitDurable(10'000).ok());
  auto done = writer.TakeDurable();
  REQUIRE(done.has_value());
  CHECK(done->positions[0].next_offset == 1);
  CHECK(writer.counters().failed_attempts.load() == 1);
  CHECK(writer.StoreCounters().commit_failures == 1);
  writer.Stop();
  CHECK(temp.Open(true)->StoredPosition("file:/x", 0) == 1);
}

TEST_CASE("stopping with a batch unwritten leaves its positions unstored", "[stream]") {
  TempStore temp;
  auto store = temp.Open();
  REQUIRE(store->TEST_LimitPages(1).ok());  // the file may not grow: commits fail as on a full disk
  CommitWriter writer(std::move(store), SystemClock());
  store::CommitBatch big = Batch(0);
  for (int64_t step = 0; step < 100'000; ++step) big.history.Add("s", step, 1.0);  // needs new pages
  writer.Submit(std::move(big));
  Status waited = writer.WaitDurable(300);
  CHECK(waited.code() == StatusCode::kUnavailable);
  CHECK(waited.message().find("not durable") != std::string::npos);
  writer.Stop();
  CHECK_FALSE(temp.Open(true)->StoredPosition("file:/x", 0).has_value());
}

TEST_CASE("the writer compacts history on another thread while commits go on", "[stream]") {
  TempStore temp;
  CommitWriter writer(temp.Open(false, /*compact_points=*/1000), SystemClock());
  constexpr int kRounds = 4, kCommits = 10, kPoints = 100;  // a compaction is due every round
  const auto wait_until = [&](auto done) {  // bounded: the test asserts no time
    for (int i = 0; i < 1000 && !done(); ++i) std::this_thread::sleep_for(std::chrono::milliseconds(10));
  };
  int64_t step = 0;
  for (int round = 0; round < kRounds; ++round) {
    for (int c = 0; c < kCommits; ++c) {
      store::CommitBatch b;
      if (step == 0) b.series.push_back({"s", "*", 0});
      for (int k = 0; k < kPoints; ++k, ++step) b.history.Add("s", step, static_cast<double>(step));
      b.positions.push_back({"file:/x", 0, step});
      writer.Submit(std::move(b));
      while (writer.TakeDurable()) {
      }
    }
    REQUIRE(writer.WaitDurable(5'000).ok());
    while (writer.TakeDurable()) {
    }
    wait_until([&] { return writer.StoreCounters().compactions == static_cast<uint64_t>(round + 1); });
    INFO("round " << round);
    CHECK(writer.StoreCounters().compactions == static_cast<uint64_t>(round + 1));
    CHECK(writer.StoreCounters().log_points == 0);
  }
  CHECK(writer.counters().compactions_prepared.load() == kRounds);
  CHECK(writer.counters().compaction_errors.load() == 0);
  writer.Stop();
  auto reader = temp.Open(/*read_only=*/true);
  Result<store::HistorySlice> tail = reader->HistoryTail("s", kRounds * kCommits * kPoints);
  REQUIRE(tail.ok());
  CHECK(tail->first_step == 0);
  REQUIRE(tail->values.size() == static_cast<size_t>(step));
  for (size_t i = 0; i < tail->values.size(); ++i) REQUIRE(tail->values[i] == static_cast<double>(i));
}

TEST_CASE("the upkeep thread copies the WAL while the writer commits, and the WAL stays bounded", "[stream]") {
  TempStore temp;
  constexpr int kPages = 40;  // the writer's own checkpoint threshold; upkeep copies every 10 pages
  CommitWriter writer(temp.Open(false, 3'000'000, kPages), SystemClock());
  constexpr int kCommits = 60;
  std::string filler(40'000, 'x');  // a few pages a commit
  int64_t previous = 0, restarts = 0;
  for (int i = 0; i < kCommits; ++i) {
    store::CommitBatch b = Batch(i);
    b.states.front().encoded = filler;
    writer.Submit(std::move(b));
    REQUIRE(writer.WaitDurable(5'000).ok());
    while (writer.TakeDurable()) {
    }
    const int64_t frames = writer.StoreCounters().wal_frames;
    restarts += frames < previous ? 1 : 0;
    previous = frames;
    if (i % 15 == 14) {
      // A checkpoint's fsync can outlast many of these tiny commits, and only one connection
      // checkpoints at a time: let the upkeep thread's finish before going on (bounded wait).
      const uint64_t before = writer.counters().checkpoints.load();
      for (int k = 0; k < 500 && writer.counters().checkpoints.load() == before; ++k)
        std::this_thread::sleep_for(std::chrono::milliseconds(10));
    }
  }
  writer.Stop();
  CHECK(writer.counters().checkpoints.load() > 0);
  CHECK(writer.counters().checkpoint_errors.load() == 0);
  CHECK(writer.StoreCounters().wal_checkpoints > 0);  // the writer's, which let the WAL start over
  // A checkpoint beside a busy writer never copies the whole WAL; the writer's own does, so the
  // WAL starts over again and again instead of growing with every commit (~4 pages each here).
  CHECK(restarts >= 2);
  CHECK(writer.StoreCounters().commits == kCommits);
  auto reader = temp.Open(/*read_only=*/true);
  CHECK(reader->StoredPosition("file:/x", 0) == kCommits);
}

}  // namespace plimsoll::stream
