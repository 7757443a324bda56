#include "plimsoll/store/store.h"

#include <catch2/catch.hpp>
#include <cmath>
#include <thread>

#include "store/sqlite.h"
#include "store/store_test_util.h"

namespace plimsoll::store {
namespace {

using testing::OpenOrDie;
using testing::SeriesName;
using testing::StateBytes;
using testing::TempDir;
using testing::TestOptions;

// A batch touching every table: `n` series (created when `create`), each with a model, a state
// for `step`, a history point, a flag and an alert; one dead letter, one event, one position.
CommitBatch FullBatch(int n, int64_t step, bool create, int64_t next_offset) {
  CommitBatch b;
  for (int i = 0; i < n; ++i) {
    std::string name = SeriesName(i);
    if (create) b.series.push_back({name, "calls", 1000 + i});
    ModelRecord m;
    m.series = name;
    m.spec = "ETS(M,Ad,M)";
    m.period = 24;
    m.alpha = 0.3, m.beta = 0.01, m.gamma = 0.1, m.phi = 0.98, m.sigma2 = 0.002, m.loglik = -512.25;
    m.aicc = 1050.5, m.fitted_ms = 7000, m.reason = "warmup";
    b.models.push_back(m);
    b.states.push_back({name, step, step * 900'000, StateBytes(i, step)});
    b.history.Add(name, step, 100.0 + i + 0.25 * static_cast<double>(step));
    b.flags.push_back({name, step, step * 900'000, 250.0, 100.0, 80.0, 120.0, 0.99, 4.5, "ETS(M,Ad,M)"});
    b.alerts.push_back({name, step, step * 900'000, AlertKind::kRaised, R"({"run":3})"});
  }
  b.dead_letters.push_back({5000, "file:/in.csv", 0, 77, "s1,not-a-time,3", "line 4: time 'not-a-time' unparseable", 1});
  b.events.push_back({6000, SeriesName(0), "model_changed", R"j({"to":"ETS(M,Ad,M)"})j"});
  b.positions.push_back({"file:/in.csv", 0, next_offset});
  return b;
}

int64_t Count(const std::string& path, const std::string& table) {
  Result<std::unique_ptr<SqliteDb>> db = SqliteDb::Open(path, SQLITE_OPEN_READONLY);
  REQUIRE(db.ok());
  Result<int64_t> n = (*db)->QueryInt("SELECT count(*) FROM " + table);
  INFO(n.status().ToString());
  REQUIRE(n.ok());
  return *n;
}

TEST_CASE("committed rows read back after reopening, state bytes bit-identical", "[store]") {
  TempDir dir;
  const StoreOptions options = TestOptions(dir);
  {
    auto store = OpenOrDie(options);
    REQUIRE(store->Commit(FullBatch(50, 10, true, 4096)).ok());
    CHECK(store->counters().commits == 1);
    CHECK(store->counters().states_written == 50);
    CHECK(store->counters().history_points == 50);
  }
  auto store = OpenOrDie(options);
  std::vector<StoredSeries> loaded;
  REQUIRE(store->ForEachSeries([&](const StoredSeries& s) {
    loaded.push_back(s);
    return Status::Ok();
  }).ok());
  REQUIRE(loaded.size() == 50);
  for (int i = 0; i < 50; ++i) {
    const StoredSeries& s = loaded[static_cast<size_t>(i)];
    CHECK(s.series.name == SeriesName(i));
    CHECK(s.series.profile == "calls");
    CHECK(s.series.created_ms == 1000 + i);
    REQUIRE(s.state.has_value());
    CHECK(s.state->step == 10);
    CHECK(s.state->encoded == StateBytes(i, 10));
    REQUIRE(s.model.has_value());
    CHECK(*s.model == FullBatch(50, 10, false, 0).models[static_cast<size_t>(i)]);
  }
  CHECK(store->StoredPosition("file:/in.csv", 0) == std::optional<int64_t>(4096));
  CHECK_FALSE(store->StoredPosition("file:/in.csv", 1).has_value());
  CHECK_FALSE(store->StoredPosition("stdin", 0).has_value());

  Result<std::vector<FlagRecord>> flags = store->RecentFlags(SeriesName(3), 10);
  REQUIRE(flags.ok());
  REQUIRE(flags->size() == 1);
  CHECK(flags->front() == FullBatch(50, 10, false, 0).flags[3]);
  Result<std::vector<AlertRecord>> alerts = store->RecentAlerts(SeriesName(3), 10);
  REQUIRE(alerts.ok());
  REQUIRE(alerts->size() == 1);
  CHECK(alerts->front() == FullBatch(50, 10, false, 0).alerts[3]);
  Result<std::vector<StoredDeadLetter>> dead = store->RecentDeadLetters(10);
  REQUIRE(dead.ok());
  REQUIRE(dead->size() == 1);
  CHECK(dead->front().record.reason == "line 4: time 'not-a-time' unparseable");
  CHECK(dead->front().record.offset == 77);
  Result<std::vector<EventRecord>> events = store->RecentEvents(SeriesName(0), 10);
  REQUIRE(events.ok());
  REQUIRE(events->size() == 1);
  CHECK(events->front().kind == "model_changed");
}

TEST_CASE("a model without trend or season stores its missing parameters as null", "[store]") {
  TempDir dir;
  auto store = OpenOrDie(TestOptions(dir));
  CommitBatch b;
  b.series.push_back({"plain", "p", 0});
  ModelRecord m;
  m.series = "plain", m.spec = "ETS(A,N,N)", m.alpha = 0.5, m.sigma2 = 2.0, m.reason = "warmup";
  b.models.push_back(m);
  REQUIRE(store->Commit(b).ok());
  Result<StoredSeries> s = store->GetSeries("plain");
  REQUIRE(s.ok());
  REQUIRE(s->model.has_value());
  CHECK(s->model->alpha == 0.5);
  CHECK(std::isnan(s->model->beta));
  CHECK(std::isnan(s->model->gamma));
  CHECK(std::isnan(s->model->phi));
  CHECK(Count(dir.File("store.db"), "model WHERE beta IS NULL AND gamma IS NULL AND phi IS NULL") == 1);
}

TEST_CASE("later commits overwrite states and positions but keep earlier flags", "[store]") {
  TempDir dir;
  auto store = OpenOrDie(TestOptions(dir));
  REQUIRE(store->Commit(FullBatch(5, 1, true, 100)).ok());
  REQUIRE(store->Commit(FullBatch(5, 2, false, 200)).ok());
  Result<StoredSeries> s = store->GetSeries(SeriesName(4));
  REQUIRE(s.ok());
  CHECK(s->state->step == 2);
  CHECK(s->state->encoded == StateBytes(4, 2));
  CHECK(store->StoredPosition("file:/in.csv", 0) == std::optional<int64_t>(200));
  Result<std::vector<FlagRecord>> flags = store->RecentFlags(SeriesName(4), 10);
  REQUIRE(flags.ok());
  REQUIRE(flags->size() == 2);
  CHECK(flags->at(0).step == 2);  // newest first
  CHECK(flags->at(1).step == 1);
  CHECK(Count(dir.File("store.db"), "state") == 5);
}

TEST_CASE("re-committing the same flags and alerts after a crash adds no duplicates", "[store]") {
  TempDir dir;
  auto store = OpenOrDie(TestOptions(dir));
  const CommitBatch batch = FullBatch(20, 7, true, 10);
  REQUIRE(store->Commit(batch).ok());
  CHECK(store->counters().flags_written == 20);
  // Re-delivery: the same outputs again (another flag value even), plus one genuinely new flag.
  CommitBatch again = FullBatch(20, 7, false, 10);
  for (FlagRecord& f : again.flags) f.value = -1;
  again.flags.push_back({SeriesName(0), 8, 8 * 900'000, 1, 2, 3, 4, 0.99, 5, "ETS(A,N,N)"});
  again.alerts.push_back({SeriesName(0), 7, 7 * 900'000, AlertKind::kCleared, "{}"});
  REQUIRE(store->Commit(again).ok());
  CHECK(store->counters().flags_written == 21);
  CHECK(store->counters().flags_duplicate == 20);
  CHECK(store->counters().alerts_written == 21);  // (s0, 7, cleared) differs from (s0, 7, raised)
  CHECK(store->counters().alerts_duplicate == 20);
  CHECK(Count(dir.File("store.db"), "flags") == 21);
  CHECK(Count(dir.File("store.db"), "alerts") == 21);
  Result<std::vector<FlagRecord>> flags = store->RecentFlags(SeriesName(1), 5);
  REQUIRE(flags.ok());
  CHECK(flags->front().value == 250.0);  // the first delivery is kept
}

TEST_CASE("a commit that fails mid-way leaves nothing visible and a retry succeeds", "[store]") {
  TempDir dir;
  auto store = OpenOrDie(TestOptions(dir));
  REQUIRE(store->Commit(FullBatch(10, 1, true, 100)).ok());
  const CommitBatch batch = FullBatch(10, 2, false, 200);
  const size_t rows_before = batch.size();
  for (int64_t fail_at : {0, 1, 7, 15, 33}) {
    INFO("fail after " << fail_at << " rows");
    store->TEST_FailNextCommitAfterRows(fail_at, Status::IoError("injected: disk went away"));
    Status status = store->Commit(batch);
    REQUIRE_FALSE(status.ok());
    CHECK(status.code() == StatusCode::kIoError);
    CHECK(status.message().find("injected") != std::string::npos);
    // Nothing of the failed batch is visible, to this connection or another one.
    Result<StoredSeries> s = store->GetSeries(SeriesName(3));
    REQUIRE(s.ok());
    CHECK(s->state->step == 1);
    CHECK(store->StoredPosition("file:/in.csv", 0) == std::optional<int64_t>(100));
    CHECK(Count(dir.File("store.db"), "flags") == 10);
    CHECK(Count(dir.File("store.db"), "history_log") == 1);
    CHECK(Count(dir.File("store.db"), "state WHERE step = 2") == 0);
    CHECK(Count(dir.File("store.db"), "source_positions WHERE next_offset = 200") == 0);
  }
  CHECK(store->counters().commit_failures == 5);
  CHECK(store->counters().last_error == StatusCode::kIoError);
  CHECK(batch.size() == rows_before);
  REQUIRE(store->Commit(batch).ok());
  CHECK(Count(dir.File("store.db"), "state WHERE step = 2") == 10);
  CHECK(store->StoredPosition("file:/in.csv", 0) == std::optional<int64_t>(200));
}

TEST_CASE("a failed commit that created series forgets them, so the retry creates them again", "[store]") {
  TempDir dir;
  auto store = OpenOrDie(TestOptions(dir));
  const CommitBatch batch = FullBatch(3, 1, true, 10);
  store->TEST_FailNextCommitAfterRows(4, Status::IoError("injected"));
  REQUIRE_FALSE(store->Commit(batch).ok());
  CHECK(store->GetSeries(SeriesName(0)).status().code() == StatusCode::kNotFound);
  // A batch that only references the (rolled back) series must now be refused.
  CommitBatch state_only;
  state_only.states.push_back({SeriesName(0), 1, 0, "x"});
  Status refused = store->Commit(state_only);
  CHECK(refused.code() == StatusCode::kInvalidArgument);
  CHECK(refused.message().find("'s0'") != std::string::npos);
  REQUIRE(store->Commit(batch).ok());
  CHECK(store->GetSeries(SeriesName(2)).ok());
}

TEST_CASE("a full disk fails the commit with an io error, keeps it invisible, and a retry succeeds",
          "[store]") {
  TempDir dir;
  auto store = OpenOrDie(TestOptions(dir));
  REQUIRE(store->Commit(FullBatch(10, 1, true, 100)).ok());
  Result<std::unique_ptr<SqliteDb>> probe = SqliteDb::Open(dir.File("store.db"), SQLITE_OPEN_READONLY);
  REQUIRE(probe.ok());
  Result<int64_t> pages = (*probe)->QueryInt("PRAGMA page_count");
  REQUIRE(pages.ok());
  probe->reset();
  // Cap the file at its current size: SQLite returns SQLITE_FULL as it would on a full disk.
  REQUIRE(store->TEST_LimitPages(*pages).ok());
  CommitBatch big = FullBatch(2000, 2, false, 200);
  for (int i = 10; i < 2000; ++i) big.series.push_back({SeriesName(i), "calls", 0});
  Status status = store->Commit(big);
  INFO(status.ToString());
  REQUIRE(status.code() == StatusCode::kIoError);
  CHECK(status.message().find("full") != std::string::npos);
  CHECK(Count(dir.File("store.db"), "series") == 10);
  CHECK(Count(dir.File("store.db"), "state WHERE step = 2") == 0);
  CHECK(store->StoredPosition("file:/in.csv", 0) == std::optional<int64_t>(100));
  REQUIRE(store->TEST_LimitPages(0).ok());
  REQUIRE(store->Commit(big).ok());
  CHECK(Count(dir.File("store.db"), "state WHERE step = 2") == 2000);
}

TEST_CASE("records naming an unknown series are refused with the series named", "[store]") {
  TempDir dir;
  auto store = OpenOrDie(TestOptions(dir));
  CommitBatch b;
  b.series.push_back({"known", "p", 0});
  b.positions.push_back({"stdin", 0, 5});
  b.flags.push_back({"ghost", 1, 0, 1, 1, 0, 2, 0.99, 0, "ETS(A,N,N)"});
  Status status = store->Commit(b);
  REQUIRE(status.code() == StatusCode::kInvalidArgument);
  CHECK(status.message().find("flag for series 'ghost'") != std::string::npos);
  CHECK_FALSE(store->StoredPosition("stdin", 0).has_value());
  CHECK(store->GetSeries("known").status().code() == StatusCode::kNotFound);
}

TEST_CASE("a read-only store reads but refuses commits with a clear error", "[store]") {
  TempDir dir;
  {
    auto writer = OpenOrDie(TestOptions(dir));
    REQUIRE(writer->Commit(FullBatch(3, 1, true, 9)).ok());
  }
  StoreOptions options = TestOptions(dir);
  options.read_only = true;
  auto reader = OpenOrDie(options);
  CHECK(reader->StoredPosition("file:/in.csv", 0) == std::optional<int64_t>(9));
  CHECK(reader->GetSeries(SeriesName(1)).ok());
  Status status = reader->Commit(FullBatch(3, 2, false, 10));
  INFO(status.ToString());
  CHECK(status.code() == StatusCode::kUnavailable);
  CHECK(status.message().find("readonly") != std::string::npos);
  CHECK(status.message().find(dir.File("store.db")) != std::string::npos);
  CHECK(reader->counters().commit_failures == 1);
}

TEST_CASE("a read-only open of a missing file fails instead of creating it", "[store]") {
  TempDir dir;
  StoreOptions options = TestOptions(dir, "absent.db");
  options.read_only = true;
  Result<std::unique_ptr<Store>> store = Store::Open(options);
  REQUIRE_FALSE(store.ok());
  CHECK(store.status().code() == StatusCode::kIoError);
  CHECK_FALSE(std::filesystem::exists(dir.File("absent.db")));
}

TEST_CASE("a write lock held by another connection is retried, counted, then reported as busy", "[store]") {
  TempDir dir;
  StoreOptions options = TestOptions(dir);
  auto store = OpenOrDie(options);
  Result<std::unique_ptr<SqliteDb>> other = SqliteDb::Open(options.path, SQLITE_OPEN_READWRITE);
  REQUIRE(other.ok());
  REQUIRE((*other)->Exec("BEGIN IMMEDIATE").ok());  // holds the write lock
  const CommitBatch batch = FullBatch(4, 1, true, 50);
  Status status = store->Commit(batch);
  CHECK(status.code() == StatusCode::kBusy);
  CHECK(store->counters().busy_retries == static_cast<uint64_t>(options.busy_retries));
  CHECK(store->counters().commit_failures == 1);
  CHECK_FALSE(store->StoredPosition("file:/in.csv", 0).has_value());

  // Released while the store is backing off: the same batch then commits within its retries.
  StoreOptions patient = options;
  patient.busy_retries = 20;
  patient.backoff_initial_ms = 5;
  patient.backoff_max_ms = 20;
  store.reset();
  store = OpenOrDie(patient);
  Status released;  // Catch assertions are not thread-safe: check after join
  std::thread release([&] {
    std::this_thread::sleep_for(std::chrono::milliseconds(60));
    released = (*other)->Exec("COMMIT");
  });
  Status retried = store->Commit(batch);
  release.join();
  REQUIRE(released.ok());
  INFO(retried.ToString());
  CHECK(retried.ok());
  CHECK(store->counters().busy_retries >= 1);
  CHECK(store->StoredPosition("file:/in.csv", 0) == std::optional<int64_t>(50));
}

TEST_CASE("dead letters keep a truncated raw record and its original size", "[store]") {
  TempDir dir;
  StoreOptions options = TestOptions(dir);
  options.dead_letter_max_bytes = 64;
  auto store = OpenOrDie(options);
  CommitBatch b;
  std::string raw(10'000, 'r');
  raw[0] = '\0';  // binary-safe
  b.dead_letters.push_back({1, "kafka:calls", 3, 99, raw, "record of 10000 bytes exceeds 8192", 3});
  REQUIRE(store->Commit(b).ok());
  Result<std::vector<StoredDeadLetter>> dead = store->RecentDeadLetters(5);
  REQUIRE(dead.ok());
  REQUIRE(dead->size() == 1);
  CHECK(dead->front().raw_size == 10'000);
  CHECK(dead->front().record.raw == raw.substr(0, 64));
  CHECK(dead->front().record.partition == 3);
  CHECK(dead->front().record.status_code == 3);
}

TEST_CASE("history tail returns the last points across log and chunks, gaps as NaN", "[store]") {
  TempDir dir;
  StoreOptions options = TestOptions(dir);
  options.history_chunk_points = 16;
  auto store = OpenOrDie(options);
  CommitBatch create;
  create.series = {{"a", "p", 0}, {"b", "p", 0}};
  REQUIRE(store->Commit(create).ok());
  // 100 steps for a (step 50 missing: a gap), 10 for b, in commits of 7 points per series.
  std::vector<double> expected_a;
  for (int64_t first = 0; first < 100; first += 7) {
    CommitBatch b;
    for (int64_t step = first; step < std::min<int64_t>(first + 7, 100); ++step) {
      if (step != 50) b.history.Add("a", step, static_cast<double>(step) * 1.5);
      if (step < 10) b.history.Add("b", step, -static_cast<double>(step));
    }
    REQUIRE(store->Commit(b).ok());
  }
  auto check_a = [&](size_t n) {
    Result<HistorySlice> tail = store->HistoryTail("a", n);
    REQUIRE(tail.ok());
    const int64_t first = std::max<int64_t>(0, 100 - static_cast<int64_t>(n));
    CHECK(tail->first_step == first);
    REQUIRE(tail->values.size() == static_cast<size_t>(100 - first));
    for (size_t i = 0; i < tail->values.size(); ++i) {
      const int64_t step = first + static_cast<int64_t>(i);
      INFO("step " << step);
      if (step == 50) {
        CHECK(std::isnan(tail->values[i]));
      } else {
        CHECK(tail->values[i] == static_cast<double>(step) * 1.5);
      }
    }
  };
  check_a(30);  // all still in the log
  check_a(500);
  REQUIRE(store->CompactHistory(5).ok());  // part of the log moved into chunks
  check_a(30);
  check_a(60);
  REQUIRE(store->CompactHistory().ok());
  CHECK(Count(dir.File("store.db"), "history_log") == 0);
  check_a(30);
  check_a(73);
  check_a(500);
  // 100 points in rows of at most 16 values: 35 from the first compaction (16 + 16 + 3, the last
  // row packed with b's 10), 64 from the second.
  CHECK(Count(dir.File("store.db"),
              "history, (SELECT id FROM series WHERE name = 'a') a WHERE first_series <= a.id AND last_series >= a.id") ==
        7);
  CHECK(Count(dir.File("store.db"), "history WHERE gen = 1 AND first_series < last_series AND count = 13") == 1);
  // Each compaction is a generation of its own; a later one's rows sort after every earlier row.
  CHECK(Count(dir.File("store.db"), "history_generations") == 2);
  CHECK(Count(dir.File("store.db"), "history WHERE gen = 2 AND seq < (SELECT max(seq) FROM history WHERE gen = 1)") ==
        0);
  CHECK(Count(dir.File("store.db"), "history_generations WHERE gen = 1 AND points = 35 + 10") == 1);  // a's and b's
  Result<HistorySlice> b = store->HistoryTail("b", 4);
  REQUIRE(b.ok());
  CHECK(b->first_step == 6);
  CHECK(b->values == std::vector<double>{-6, -7, -8, -9});
  // More points after compaction land in a new row and read back with the old ones.
  CommitBatch more;
  more.history.Add("b", 10, -10);
  REQUIRE(store->Commit(more).ok());
  REQUIRE(store->CompactHistory().ok());
  b = store->HistoryTail("b", 100);
  REQUIRE(b.ok());
  CHECK(b->first_step == 0);
  CHECK(b->values.size() == 11);
  CHECK(b->values.back() == -10);
  CHECK(store->HistoryTail("nobody", 5).status().code() == StatusCode::kNotFound);
}

TEST_CASE("history tail can end at an earlier step than the newest stored one", "[store]") {
  // A restore from a checkpoint reads the history through the checkpoint's step, while later
  // points may already be durable (group commits between checkpoints).
  TempDir dir;
  StoreOptions options = TestOptions(dir);
  options.history_chunk_points = 16;
  auto store = OpenOrDie(options);
  CommitBatch create;
  create.series = {{"a", "p", 0}};
  REQUIRE(store->Commit(create).ok());
  for (int64_t first = 0; first < 100; first += 10) {
    CommitBatch b;
    for (int64_t step = first; step < first + 10; ++step) b.history.Add("a", step, 2.0 * step);
    REQUIRE(store->Commit(b).ok());
  }
  auto check = [&](size_t n, int64_t through, int64_t want_first, int64_t want_last) {
    INFO("n " << n << " through " << through);
    Result<HistorySlice> tail = store->HistoryTail("a", n, through);
    REQUIRE(tail.ok());
    if (want_last < want_first) {
      CHECK(tail->values.empty());
      return;
    }
    CHECK(tail->first_step == want_first);
    REQUIRE(tail->values.size() == static_cast<size_t>(want_last - want_first + 1));
    for (size_t i = 0; i < tail->values.size(); ++i) CHECK(tail->values[i] == 2.0 * (want_first + static_cast<int64_t>(i)));
  };
  for (int round = 0; round < 3; ++round) {  // all in the log, half compacted, all compacted
    check(10, 49, 40, 49);
    check(100, 49, 0, 49);
    check(5, 95, 91, 95);
    check(3, 1000, 97, 99);
    check(4, -1, 0, -1);
    if (round == 0) REQUIRE(store->CompactHistory(5).ok());
    if (round == 1) REQUIRE(store->CompactHistory().ok());
  }
}

TEST_CASE("history keeps points across long gaps and late corrections after compaction", "[store]") {
  TempDir dir;
  StoreOptions options = TestOptions(dir);
  options.history_chunk_points = 16;
  auto store = OpenOrDie(options);
  CommitBatch b;
  b.series = {{"g", "p", 0}};
  for (int64_t step = 0; step < 20; ++step) b.history.Add("g", step, static_cast<double>(step));
  b.history.Add("g", 1000, 1000.0);  // a gap far longer than one chunk
  REQUIRE(store->Commit(b).ok());
  REQUIRE(store->CompactHistory().ok());
  CommitBatch late;
  late.history.Add("g", 5, -5.0);    // rewrites a point inside an older chunk
  late.history.Add("g", 500, 500.0); // falls between chunks: a chunk of its own
  late.history.Add("g", 1001, 1001.0);
  REQUIRE(store->Commit(late).ok());
  REQUIRE(store->CompactHistory().ok());
  Result<HistorySlice> tail = store->HistoryTail("g", 2000);
  REQUIRE(tail.ok());
  CHECK(tail->first_step == 0);
  REQUIRE(tail->values.size() == 1002);
  size_t present = 0;
  for (size_t i = 0; i < tail->values.size(); ++i) {
    if (std::isnan(tail->values[i])) continue;
    ++present;
    CHECK(tail->values[i] == (i == 5 ? -5.0 : static_cast<double>(i)));
  }
  CHECK(present == 23);  // 0..19, 500, 1000, 1001
  Result<HistorySlice> last = store->HistoryTail("g", 3);
  REQUIRE(last.ok());
  CHECK(last->first_step == 999);
  REQUIRE(last->values.size() == 3);
  CHECK(std::isnan(last->values[0]));
  CHECK(last->values[2] == 1001.0);
}

TEST_CASE("a commit's history is logged in batch order, a series' consecutive steps as one run", "[store]") {
  TempDir dir;
  auto store = OpenOrDie(TestOptions(dir));
  CommitBatch b;
  b.series = {{"a", "p", 0}, {"b", "p", 0}};
  // 100 steps of a in a row, then 100 of b interleaved with a repeat of each of a's steps.
  for (int64_t step = 0; step < 100; ++step) b.history.Add("a", step, static_cast<double>(step));
  for (int64_t step = 0; step < 100; ++step) {
    b.history.Add("b", step, -static_cast<double>(step));
    if (step == 99) b.history.Add("a", 99, 990.0);
  }
  REQUIRE(store->Commit(b).ok());
  // Three runs (a 0..99, b 0..99, a 99): 201 values and a few header bytes each, not 24 bytes a point.
  CHECK(Count(dir.File("store.db"), "history_log WHERE format = 2 AND count = 201") == 1);
  CHECK(Count(dir.File("store.db"), "history_log WHERE length(points) <= 201 * 8 + 3 * 6") == 1);
  // Interleaved points are runs of one each; compaction groups them by series.
  CommitBatch c;
  for (int64_t step = 100; step < 110; ++step) {
    c.history.Add("a", step, static_cast<double>(step));
    c.history.Add("b", step, -static_cast<double>(step));
  }
  REQUIRE(store->Commit(c).ok());
  CHECK(Count(dir.File("store.db"), "history_log WHERE count = 20 AND length(points) >= 20 * (8 + 3)") == 1);
  REQUIRE(store->CompactHistory().ok());
  CHECK(Count(dir.File("store.db"), "history WHERE length(points) <= 221 * 8 + 4 * 6") == 1);
  Result<HistorySlice> a = store->HistoryTail("a", 2, 99);
  REQUIRE(a.ok());
  CHECK(a->first_step == 98);
  CHECK(a->values == std::vector<double>{98, 990});  // the later point for step 99 wins
  Result<HistorySlice> bt = store->HistoryTail("b", 110);
  REQUIRE(bt.ok());
  CHECK(bt->values.size() == 110);
  CHECK(bt->values[99] == -99);
  CHECK(bt->values.back() == -109);
}

// A store holding series "a" with one logged point, and `sql` then run on its file from another
// connection (a damaged or foreign row).
std::unique_ptr<Store> StoreWithRowAdded(const TempDir& dir, const char* sql) {
  auto store = OpenOrDie(TestOptions(dir));
  CommitBatch b;
  b.series = {{"a", "p", 0}};
  b.history.Add("a", 0, 1.0);
  REQUIRE(store->Commit(b).ok());
  Result<std::unique_ptr<SqliteDb>> db = SqliteDb::Open(dir.File("store.db"), SQLITE_OPEN_READWRITE);
  REQUIRE(db.ok());
  REQUIRE((*db)->Exec(sql).ok());
  return store;
}

TEST_CASE("a damaged history log row is reported as corruption naming the row", "[store]") {
  TempDir dir;
  // A run claiming 9 values with 2 bytes behind it.
  auto store =
      StoreWithRowAdded(dir, "INSERT INTO history_log(seq, count, points, format) VALUES (77, 9, x'010009ffff', 2)");
  Result<HistorySlice> tail = store->HistoryTail("a", 5);
  REQUIRE_FALSE(tail.ok());
  CHECK(tail.status().code() == StatusCode::kCorruption);
  CHECK(tail.status().message().find("history_log row 77") != std::string::npos);
  Status compacted = store->CompactHistory();
  CHECK(compacted.code() == StatusCode::kCorruption);
  CHECK(Count(dir.File("store.db"), "history_log") == 2);  // nothing moved, nothing lost
}

TEST_CASE("another connection can copy the WAL first; the writer checkpoints after commits that fill it", "[store]") {
  TempDir dir;
  StoreOptions options = TestOptions(dir);
  options.wal_autocheckpoint_pages = 100'000;  // the writer's own checkpoint does not run at first
  auto commit_some = [](Store& store, int first, int count = 10) {
    for (int i = first; i < first + count; ++i) {
      CommitBatch b;
      if (i == 0) b.series = {{"a", "p", 0}};
      b.states.push_back({"a", i, i, std::string(40'000, static_cast<char>('a' + i % 26))});
      REQUIRE(store.Commit(b).ok());
    }
  };
  auto writer = OpenOrDie(options);
  commit_some(*writer, 0);
  CHECK(writer->counters().wal_checkpoints == 0);
  const int64_t ten_commits = writer->counters().wal_frames;
  CHECK(ten_commits >= 10);
  auto upkeep = OpenOrDie(options);
  REQUIRE(upkeep->CheckpointWal().ok());
  CHECK(upkeep->counters().wal_checkpoints == 1);
  // All of it was copied (the writer was idle), so its next commit starts the WAL over.
  commit_some(*writer, 10);
  CHECK(writer->counters().wal_frames <= ten_commits + 2);
  // With a threshold of 4 pages the writer checkpoints after commits, as SQLite's own would (one
  // that meets another connection's checkpoint is skipped, as SQLite's is).
  writer.reset();
  options.wal_autocheckpoint_pages = 4;
  writer = OpenOrDie(options);
  commit_some(*writer, 20);
  CHECK(writer->counters().wal_checkpoints >= 1);
  CHECK(writer->counters().wal_frames < ten_commits);
  // Unless told to leave them to another connection: then every commit lengthens the WAL.
  writer->SetCheckpointInCommit(false);
  const uint64_t before = writer->counters().wal_checkpoints;
  commit_some(*writer, 30, 1);  // may start the WAL over, if the last checkpoint copied all of it
  const int64_t after_first = writer->counters().wal_frames;
  commit_some(*writer, 31, 9);
  CHECK(writer->counters().wal_checkpoints == before);
  CHECK(writer->counters().wal_frames >= after_first + 9);
  options.read_only = true;
  auto reader = OpenOrDie(options);
  CHECK(reader->CheckpointWal().code() == StatusCode::kUnavailable);
  Result<StoredSeries> a = reader->GetSeries("a");
  REQUIRE(a.ok());
  CHECK(a->state->step == 39);
}

TEST_CASE("a log row naming a series the store does not have is not compacted", "[store]") {
  TempDir dir;
  // Series key 9 (varint 09), first step 0, one value.
  auto store = StoreWithRowAdded(
      dir, "INSERT INTO history_log(seq, count, points, format) VALUES (78, 1, x'0900010000000000000000', 2)");
  Status compacted = store->CompactHistory();
  CHECK(compacted.code() == StatusCode::kCorruption);
  CHECK(compacted.message().find("history_log row 78 names series key 9") != std::string::npos);
  CHECK(Count(dir.File("store.db"), "history_log") == 2);
}

TEST_CASE("a damaged directory of a packed history row is reported as corruption naming the row", "[store]") {
  TempDir dir;
  auto store = OpenOrDie(TestOptions(dir));
  CommitBatch b;
  b.series = {{"a", "p", 0}, {"b", "p", 0}};
  b.history.Add("a", 0, 1.0);
  b.history.Add("b", 0, 2.0);
  REQUIRE(store->Commit(b).ok());
  REQUIRE(store->CompactHistory().ok());
  REQUIRE(store->HistoryTail("b", 5).ok());
  {
    Result<std::unique_ptr<SqliteDb>> db = SqliteDb::Open(dir.File("store.db"), SQLITE_OPEN_READWRITE);
    REQUIRE(db.ok());
    // Two entries announced, the second cut off after its series delta.
    REQUIRE((*db)->Exec("UPDATE history SET directory = x'0202000000010a02'").ok());
  }
  Result<HistorySlice> tail = store->HistoryTail("b", 5);
  REQUIRE_FALSE(tail.ok());
  CHECK(tail.status().code() == StatusCode::kCorruption);
  CHECK(tail.status().message().find("history row") != std::string::npos);
  CHECK(tail.status().message().find("damaged directory") != std::string::npos);
}

TEST_CASE("a compaction prepared on a read-only store and applied by the writer equals one done in place", "[store]") {
  TempDir dir;
  StoreOptions options = TestOptions(dir);
  options.history_chunk_points = 16;
  auto writer = OpenOrDie(options);
  StoreOptions twin_options = options;
  twin_options.path = dir.File("twin.db");
  auto twin = OpenOrDie(twin_options);  // gets the same commits and compacts in place
  auto commit_both = [&](const CommitBatch& b) {
    REQUIRE(writer->Commit(b).ok());
    REQUIRE(twin->Commit(b).ok());
  };
  CommitBatch create;
  create.series = {{"a", "p", 0}, {"b", "p", 0}};
  commit_both(create);
  for (int64_t first = 0; first < 60; first += 6) {
    CommitBatch b;
    for (int64_t step = first; step < first + 6; ++step) {
      b.history.Add("a", step, 0.5 * static_cast<double>(step));
      if (step % 2 == 0) b.history.Add("b", step, -static_cast<double>(step));
    }
    commit_both(b);
  }
  StoreOptions reader_options = options;
  reader_options.read_only = true;
  auto reader = OpenOrDie(reader_options);
  Result<PreparedCompaction> prepared = reader->PrepareCompaction(7);
  REQUIRE(prepared.ok());
  CHECK(prepared->log_rows == 7);
  CHECK(prepared->points == 7 * 9);  // 6 of a and 3 of b per commit (the create commit logged nothing)
  // The writer commits on while the compaction is prepared; those rows stay in the log.
  CommitBatch later;
  later.history.Add("a", 60, 30.0);
  commit_both(later);
  REQUIRE(writer->ApplyCompaction(*prepared).ok());
  REQUIRE(twin->CompactHistory(7).ok());
  CHECK(writer->counters().compactions == 1);
  CHECK(writer->counters().log_points == twin->counters().log_points);
  for (const char* name : {"a", "b"}) {
    Result<HistorySlice> got = writer->HistoryTail(name, 100);
    Result<HistorySlice> want = twin->HistoryTail(name, 100);
    REQUIRE(got.ok());
    REQUIRE(want.ok());
    CHECK(got->first_step == want->first_step);
    CHECK(got->values.size() == want->values.size());
    for (size_t i = 0; i < got->values.size(); ++i)
      CHECK((got->values[i] == want->values[i] || (std::isnan(got->values[i]) && std::isnan(want->values[i]))));
  }
  CHECK(Count(dir.File("store.db"), "history") == Count(dir.File("twin.db"), "history"));
  CHECK(Count(dir.File("store.db"), "history_log") == 4);  // 3 commits not prepared + the later one
  // Applying the same preparation again would move rows that are gone: refused, nothing written.
  Status again = writer->ApplyCompaction(*prepared);
  CHECK(again.code() == StatusCode::kAborted);
  CHECK(again.message().find("stale") != std::string::npos);
  CHECK(Count(dir.File("store.db"), "history_generations") == 1);
  CHECK(reader->ApplyCompaction(*prepared).code() == StatusCode::kUnavailable);
}

TEST_CASE("commit leaves the log alone when compaction in commit is off", "[store]") {
  TempDir dir;
  StoreOptions options = TestOptions(dir);
  options.history_compact_points = 1000;
  auto store = OpenOrDie(options);
  store->SetCompactInCommit(false);
  CommitBatch b;
  b.series = {{"a", "p", 0}};
  for (int64_t i = 0; i < 1500; ++i) b.history.Add("a", i, 1.0);
  REQUIRE(store->Commit(b).ok());
  CHECK(store->counters().compactions == 0);
  CHECK(store->counters().log_points == 1500);
  REQUIRE(store->CompactHistory().ok());
  CHECK(store->counters().log_points == 0);
}

TEST_CASE("name hints speed lookups up and never misplace a record, even when wrong", "[store]") {
  TempDir dir;
  auto store = OpenOrDie(TestOptions(dir));
  CommitBatch create;
  create.series = {{"a", "p", 0}, {"b", "p", 0}};
  create.states = {{"a", 1, 0, "a1", 0}, {"b", 1, 0, "b1", 1}};  // hints 0 and 1 learnt here
  REQUIRE(store->Commit(create).ok());
  CommitBatch swapped;  // the same hints now given to the other series
  swapped.states = {{"a", 2, 0, "a2", 1}, {"b", 2, 0, "b2", 0}};
  swapped.history.series = {"a", "b"};
  swapped.history.hints = {1, 0};
  swapped.history.points = {{0, 2, 20.0}, {1, 2, -20.0}};
  swapped.flags = {{"a", 2, 0, 20.0, 0, -1, 1, 0.99, 20, "ETS(A,N,N)"}, {"b", 2, 0, -20.0, 0, -1, 1, 0.99, -20, "ETS(A,N,N)"}};
  swapped.flag_hints = {1, 0};
  REQUIRE(store->Commit(swapped).ok());
  CHECK(store->RecentFlags("a", 5)->at(0).value == 20.0);
  CHECK(store->RecentFlags("b", 5)->at(0).value == -20.0);
  CommitBatch unknown;  // a hint never seen, and one beyond any dense index
  unknown.states = {{"a", 3, 0, "a3", 7}, {"b", 3, 0, "b3", kNoHint - 1}};
  REQUIRE(store->Commit(unknown).ok());
  CHECK(store->GetSeries("a")->state->encoded == "a3");
  CHECK(store->GetSeries("b")->state->encoded == "b3");
  CHECK(store->HistoryTail("a", 1)->values == std::vector<double>{20.0});
  CHECK(store->HistoryTail("b", 1)->values == std::vector<double>{-20.0});
  // A rolled-back commit that added a series forgets that series' hint; the next commits still resolve.
  CommitBatch failing;
  failing.series = {{"c", "p", 0}};
  failing.states = {{"c", 1, 0, "c1", 2}};
  store->TEST_FailNextCommitAfterRows(2, Status::IoError("injected"));
  CHECK_FALSE(store->Commit(failing).ok());
  CommitBatch after;
  after.states = {{"a", 4, 0, "a4", 0}, {"b", 4, 0, "b4", 1}};
  REQUIRE(store->Commit(after).ok());
  CHECK(store->GetSeries("a")->state->encoded == "a4");
  CHECK(store->GetSeries("b")->state->encoded == "b4");
  CHECK(store->GetSeries("c").status().code() == StatusCode::kNotFound);
}

TEST_CASE("history entries go unnamed once a commit named their hint, and only then", "[store]") {
  TempDir dir;
  auto store = OpenOrDie(TestOptions(dir));
  const auto history = [](std::vector<std::string> names, std::vector<uint32_t> hints, int64_t step) {
    CommitBatch b;
    for (uint32_t k = 0; k < names.size(); ++k) b.history.points.push_back({k, step, 10.0 * (k + 1) + step});
    b.history.series = std::move(names);
    b.history.hints = std::move(hints);
    return b;
  };
  CommitBatch create = history({"a", "b"}, {5, 6}, 1);
  create.series = {{"a", "p", 0}, {"b", "p", 0}};
  REQUIRE(store->Commit(create).ok());
  REQUIRE(store->Commit(history({"", ""}, {5, 6}, 2)).ok());  // named by the first commit
  CHECK(store->HistoryTail("a", 5)->values == std::vector<double>{11.0, 12.0});
  CHECK(store->HistoryTail("b", 5)->values == std::vector<double>{21.0, 22.0});
  // Only history entries may go unnamed: a state or flag must name its series.
  CommitBatch unnamed_state;
  unnamed_state.states = {{"", 2, 0, "x", 5}};
  CHECK(store->Commit(unnamed_state).code() == StatusCode::kInvalidArgument);
  CommitBatch unnamed_flag;
  unnamed_flag.flags = {{"", 2, 0, 1, 0, -1, 1, 0.99, 1, "ETS(A,N,N)"}};
  unnamed_flag.flag_hints = {5};
  CHECK(store->Commit(unnamed_flag).code() == StatusCode::kInvalidArgument);

  // A hint no commit named: refused whole, naming the hint; nothing of the batch is written.
  Status unknown = store->Commit(history({"", ""}, {5, 9}, 3));
  CHECK(unknown.code() == StatusCode::kInvalidArgument);
  CHECK(unknown.message().find("hint 9") != std::string::npos);
  CHECK(store->HistoryTail("a", 5)->values == std::vector<double>{11.0, 12.0});

  // A commit that named a new series with a hint, then rolled back: that hint is forgotten, the
  // committed ones are not.
  CommitBatch failing = history({"c", ""}, {7, 5}, 3);
  failing.series = {{"c", "p", 0}};
  store->TEST_FailNextCommitAfterRows(2, Status::IoError("injected"));  // the series and the log row
  REQUIRE_FALSE(store->Commit(failing).ok());
  CHECK(store->Commit(history({""}, {7}, 3)).code() == StatusCode::kInvalidArgument);
  REQUIRE(store->Commit(history({"", ""}, {5, 6}, 3)).ok());
  CHECK(store->HistoryTail("a", 5)->values == std::vector<double>{11.0, 12.0, 13.0});
  CHECK(store->HistoryTail("b", 5)->values == std::vector<double>{21.0, 22.0, 23.0});
  CHECK(store->GetSeries("c").status().code() == StatusCode::kNotFound);
}

TEST_CASE("commit compacts the history log once it passes the threshold", "[store]") {
  TempDir dir;
  StoreOptions options = TestOptions(dir);
  options.history_compact_points = 1000;
  auto store = OpenOrDie(options);
  CommitBatch create;
  create.series = {{"a", "p", 0}};
  REQUIRE(store->Commit(create).ok());
  for (int64_t k = 0; k < 3; ++k) {
    CommitBatch b;
    for (int64_t i = 0; i < 400; ++i) b.history.Add("a", k * 400 + i, static_cast<double>(k * 400 + i));
    REQUIRE(store->Commit(b).ok());
  }
  CHECK(store->counters().compactions == 1);
  CHECK(Count(dir.File("store.db"), "history_log") == 0);
  Result<HistorySlice> tail = store->HistoryTail("a", 1200);
  REQUIRE(tail.ok());
  REQUIRE(tail->values.size() == 1200);
  for (size_t i = 0; i < 1200; ++i) REQUIRE(tail->values[i] == static_cast<double>(i));
}

TEST_CASE("series list pages by name and omits state bytes", "[store]") {
  TempDir dir;
  auto store = OpenOrDie(TestOptions(dir));
  REQUIRE(store->Commit(FullBatch(12, 1, true, 1)).ok());
  Result<std::vector<StoredSeries>> page = store->ListSeries(5);
  REQUIRE(page.ok());
  REQUIRE(page->size() == 5);
  CHECK(page->front().series.name == "s0");
  CHECK(page->at(1).series.name == "s1");
  CHECK(page->at(2).series.name == "s10");  // name order
  CHECK(page->front().state->encoded.empty());
  CHECK(page->front().state->step == 1);
  Result<std::vector<StoredSeries>> rest = store->ListSeries(100, page->back().series.name);
  REQUIRE(rest.ok());
  CHECK(rest->size() == 7);
}

TEST_CASE("synchronous levels parse from text and reject anything else", "[store]") {
  CHECK(*ParseSynchronous("FULL") == Synchronous::kFull);
  CHECK(*ParseSynchronous("normal") == Synchronous::kNormal);
  CHECK(*ParseSynchronous("off") == Synchronous::kOff);
  Result<Synchronous> bad = ParseSynchronous("sometimes");
  REQUIRE_FALSE(bad.ok());
  CHECK(bad.status().message().find("'sometimes'") != std::string::npos);
}

TEST_CASE("store options are validated and clamped at open", "[store]") {
  TempDir dir;
  StoreOptions options = TestOptions(dir);
  options.history_chunk_points = 1;
  options.busy_retries = -3;
  auto store = OpenOrDie(options);
  CHECK(store->options().history_chunk_points == 16);
  CHECK(store->options().busy_retries == 0);
  StoreOptions empty;
  CHECK(Store::Open(empty).status().code() == StatusCode::kInvalidArgument);
}

TEST_CASE("a new store file gets the configured page size and an existing file keeps its own", "[store]") {
  TempDir dir;
  auto page_size = [&](const std::string& file) {
    Result<std::unique_ptr<SqliteDb>> db = SqliteDb::Open(file, SQLITE_OPEN_READONLY);
    REQUIRE(db.ok());
    Result<int64_t> size = (*db)->QueryInt("PRAGMA page_size");
    REQUIRE(size.ok());
    return *size;
  };
  StoreOptions options = TestOptions(dir);
  CHECK(options.page_bytes == 16384);  // the documented default
  OpenOrDie(options).reset();
  CHECK(page_size(dir.File("store.db")) == 16384);
  options.page_bytes = 4096;  // ignored: the file exists
  auto store = OpenOrDie(options);
  REQUIRE(store->Commit(FullBatch(3, 1, true, 1)).ok());
  store.reset();
  CHECK(page_size(dir.File("store.db")) == 16384);
  options.path = dir.File("small-pages.db");
  OpenOrDie(options).reset();
  CHECK(page_size(options.path) == 4096);
  options.page_bytes = 3000;
  Result<std::unique_ptr<Store>> bad = Store::Open(options);
  REQUIRE_FALSE(bad.ok());
  CHECK(bad.status().code() == StatusCode::kInvalidArgument);
  CHECK(bad.status().message().find("page_bytes 3000") != std::string::npos);
}

}  // namespace
}  // namespace plimsoll::store
