#include "store/schema.h"

#include <catch2/catch.hpp>
#include <cstring>
#include <fstream>

#include "store/store_test_util.h"

namespace plimsoll::store {
namespace {

using testing::TempDir;

std::unique_ptr<SqliteDb> RawOpen(const std::string& path) {
  Result<std::unique_ptr<SqliteDb>> db = SqliteDb::Open(path, SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE);
  REQUIRE(db.ok());
  return std::move(db.value());
}

int64_t Query(SqliteDb& db, const std::string& sql) {
  Result<int64_t> v = db.QueryInt(sql);
  INFO(sql << ": " << v.status().ToString());
  REQUIRE(v.ok());
  return *v;
}

TEST_CASE("migration versions are consecutive from one", "[store]") {
  int expected = 1;
  for (const Migration& m : Migrations()) CHECK(m.version == expected++);
  CHECK(LatestSchemaVersion() == expected - 1);
}

TEST_CASE("a new store gets every table at the latest schema version", "[store]") {
  TempDir dir;
  auto store = testing::OpenOrDie(testing::TestOptions(dir));
  store.reset();
  auto db = RawOpen(dir.File("store.db"));
  CHECK(Query(*db, "PRAGMA user_version") == LatestSchemaVersion());
  CHECK(Query(*db, "PRAGMA application_id") == kApplicationId);
  for (const char* table : {"series", "model", "state", "history", "history_log", "history_seq", "flags", "alerts",
                            "dead_letters", "source_positions", "events"}) {
    INFO(table);
    CHECK(Query(*db, std::string("SELECT count(*) FROM sqlite_schema WHERE type = 'table' AND name = '") + table +
                         "'") == 1);
  }
  Result<Statement> mode = db->Prepare("PRAGMA journal_mode");
  REQUIRE(mode.ok());
  REQUIRE(*mode->Step());
  CHECK(mode->Text(0) == "wal");
}

TEST_CASE("a version 1 store migrates to the latest and keeps its rows", "[store]") {
  TempDir dir;
  {
    auto db = RawOpen(dir.File("store.db"));
    REQUIRE(MigrateSchema(*db, 1).ok());
    CHECK(Query(*db, "PRAGMA user_version") == 1);
    CHECK(Query(*db, "SELECT count(*) FROM sqlite_schema WHERE name = 'history'") == 0);
    REQUIRE(db->Exec("INSERT INTO series(id, name, profile, created_ms) VALUES (7, 'queue-a', 'calls', 1000);"
                     "INSERT INTO state(series, step, time_ms, encoded) VALUES (7, 42, 5000, x'00ff10');"
                     "INSERT INTO source_positions VALUES ('file:/x.csv', 0, 1234);"
                     "INSERT INTO flags VALUES (7, 40, 4000, 9.5, 5, 4, 6, 0.99, 3.1, 'ETS(A,N,N)');")
                .ok());
  }
  auto store = testing::OpenOrDie(testing::TestOptions(dir));
  Result<StoredSeries> series = store->GetSeries("queue-a");
  REQUIRE(series.ok());
  REQUIRE(series->state.has_value());
  CHECK(series->state->step == 42);
  CHECK(series->state->encoded == std::string("\x00\xff\x10", 3));
  CHECK(store->StoredPosition("file:/x.csv", 0) == std::optional<int64_t>(1234));
  // The history added by version 2 works on the migrated file.
  CommitBatch batch;
  batch.history.Add("queue-a", 43, 1.5);
  REQUIRE(store->Commit(batch).ok());
  Result<HistorySlice> tail = store->HistoryTail("queue-a", 10);
  REQUIRE(tail.ok());
  CHECK(tail->first_step == 43);
  CHECK(tail->values == std::vector<double>{1.5});
  // The flag kept its fields through versions 8 and 9, whose tables still ignore a repeat of it.
  CommitBatch again;
  again.flags.push_back({"queue-a", 40, 4000, 1, 2, 3, 4, 0.9, 1, "ETS(A,N,N)"});
  again.flags.push_back({"queue-a", 41, 4100, 10, 5, 4, 6, 0.99, 4.0, "ETS(A,N,N)"});
  REQUIRE(store->Commit(again).ok());
  CHECK(store->counters().flags_duplicate == 1);
  Result<std::vector<FlagRecord>> flags = store->RecentFlags("queue-a", 10);
  REQUIRE(flags.ok());
  REQUIRE(flags->size() == 2);
  CHECK(flags->back() == FlagRecord{"queue-a", 40, 4000, 9.5, 5, 4, 6, 0.99, 3.1, "ETS(A,N,N)"});
  CHECK(flags->front().step == 41);
  store.reset();
  auto db = RawOpen(dir.File("store.db"));
  CHECK(Query(*db, "PRAGMA user_version") == LatestSchemaVersion());
}

TEST_CASE("a version 8 store's flags move to the (step, series) key and stay unique", "[store]") {
  TempDir dir;
  {
    auto db = RawOpen(dir.File("store.db"));
    REQUIRE(MigrateSchema(*db, 8).ok());
    REQUIRE(db->Exec("INSERT INTO series(id, name, profile, created_ms) VALUES (1, 'a', 'p', 0), (2, 'b', 'p', 0);"
                     "INSERT INTO flags(series, step, time_ms, value, expected, lower, upper, level, score, form) "
                     "VALUES (2, 11, 1100, 1, 2, 3, 4, 0.99, 5, 'ETS(A,N,N)'), (1, 12, 1200, 6, 2, 3, 4, 0.99, 7, "
                     "'ETS(A,N,A)'), (1, 10, 1000, 8, 2, 3, 4, 0.99, 9, 'ETS(A,N,A)');")
                .ok());
  }
  auto store = testing::OpenOrDie(testing::TestOptions(dir));
  CommitBatch repeat;  // one flag already stored, one new
  repeat.flags.push_back({"a", 10, 1000, 100, 2, 3, 4, 0.99, 9, "ETS(A,N,A)"});
  repeat.flags.push_back({"b", 13, 1300, 10, 2, 3, 4, 0.99, 11, "ETS(A,N,N)"});
  REQUIRE(store->Commit(repeat).ok());
  CHECK(store->counters().flags_duplicate == 1);
  Result<std::vector<FlagRecord>> a = store->RecentFlags("a", 10);
  REQUIRE(a.ok());
  REQUIRE(a->size() == 2);
  CHECK((*a)[0] == FlagRecord{"a", 12, 1200, 6, 2, 3, 4, 0.99, 7, "ETS(A,N,A)"});
  CHECK((*a)[1] == FlagRecord{"a", 10, 1000, 8, 2, 3, 4, 0.99, 9, "ETS(A,N,A)"});  // the stored one kept
  Result<std::vector<FlagRecord>> b = store->RecentFlags("b", 1);
  REQUIRE(b.ok());
  REQUIRE(b->size() == 1);
  CHECK((*b)[0].step == 13);
  Result<std::vector<FlagRecord>> all = store->RecentFlags("", 10);
  REQUIRE(all.ok());
  REQUIRE(all->size() == 4);
  CHECK((*all)[0].time_ms == 1300);
  CHECK((*all)[3].time_ms == 1000);
  store.reset();
  auto db = RawOpen(dir.File("store.db"));
  CHECK(Query(*db, "PRAGMA user_version") == LatestSchemaVersion());
  CHECK(Query(*db, "SELECT count(*) FROM sqlite_schema WHERE name = 'flags' AND sql LIKE '%PRIMARY KEY (step, series)%'") == 1);
  CHECK(Query(*db, "SELECT count(*) FROM sqlite_schema WHERE name = 'flags_by_series'") == 0);
}

TEST_CASE("a version 2 store migrates to version 3 and keeps refit requests until taken", "[store]") {
  TempDir dir;
  {
    auto db = RawOpen(dir.File("store.db"));
    REQUIRE(MigrateSchema(*db, 2).ok());
    CHECK(Query(*db, "SELECT count(*) FROM sqlite_schema WHERE name = 'refit_requests'") == 0);
  }
  auto store = testing::OpenOrDie(testing::TestOptions(dir));
  REQUIRE(store->AddRefitRequest("queue-*", "seasonal profile drifted", 1000).ok());
  REQUIRE(store->AddRefitRequest("pump-7", "", 2000).ok());
  Result<std::vector<RefitRequestRecord>> taken = store->TakeRefitRequests();
  REQUIRE(taken.ok());
  REQUIRE(taken->size() == 2);
  CHECK((*taken)[0].pattern == "queue-*");
  CHECK((*taken)[0].reason == "seasonal profile drifted");
  CHECK((*taken)[1].pattern == "pump-7");
  CHECK((*taken)[1].requested_ms == 2000);
  Result<std::vector<RefitRequestRecord>> again = store->TakeRefitRequests();
  REQUIRE(again.ok());
  CHECK(again->empty());
  store.reset();
  auto db = RawOpen(dir.File("store.db"));
  CHECK(Query(*db, "PRAGMA user_version") == LatestSchemaVersion());
}

// One format-1 history_log entry (schema 2-3): int64 series key, int64 step, float64 value.
std::string OldLogPoint(int64_t series, int64_t step, double value) {
  std::string out(24, '\0');
  std::memcpy(out.data(), &series, 8);
  std::memcpy(out.data() + 8, &step, 8);
  std::memcpy(out.data() + 16, &value, 8);
  return out;
}

TEST_CASE("a version 3 store's history log and chunks read back after migration, mixed with new rows", "[store]") {
  TempDir dir;
  {
    auto db = RawOpen(dir.File("store.db"));
    REQUIRE(MigrateSchema(*db, 3).ok());
    REQUIRE(db->Exec("INSERT INTO series(id, name, profile, created_ms) VALUES (1, 'a', 'p', 0), (2, 'b', 'p', 0)").ok());
    // Steps 0..4 of a and 0..1 of b, interleaved, in the 24-byte layout of schema 2-3.
    std::string blob;
    for (int64_t step = 0; step < 5; ++step) {
      blob += OldLogPoint(1, step, 10.0 + static_cast<double>(step));
      if (step < 2) blob += OldLogPoint(2, step, -1.0 - static_cast<double>(step));
    }
    Result<Statement> insert = db->Prepare("INSERT INTO history_log(count, points) VALUES (7, ?1)");
    REQUIRE(insert.ok());
    REQUIRE(insert->BindBlob(1, blob).Run().ok());
    // An older compacted chunk of a: steps -3..-1, plain float64 values.
    const double chunk[] = {7, 8, 9};
    Result<Statement> old_chunk =
        db->Prepare("INSERT INTO history(series, first_step, count, points) VALUES (1, -3, 3, ?1)");
    REQUIRE(old_chunk.ok());
    REQUIRE(old_chunk->BindBlob(1, std::string_view(reinterpret_cast<const char*>(chunk), sizeof chunk)).Run().ok());
  }
  StoreOptions options = testing::TestOptions(dir);
  options.history_chunk_points = 16;
  auto store = testing::OpenOrDie(options);
  {
    auto db = RawOpen(dir.File("store.db"));
    CHECK(Query(*db, "PRAGMA user_version") == LatestSchemaVersion());
    CHECK(Query(*db, "SELECT format FROM history_log") == 1);
    CHECK(Query(*db, "SELECT count(*) FROM history WHERE first_series = 1 AND last_series = 1 AND min_step = -3 AND max_step = -1") == 1);
  }
  // New rows (format 2) after the old one; step 4 of a is corrected, which must win.
  CommitBatch batch;
  batch.history.Add("a", 4, 14.5);
  batch.history.Add("b", 2, -3.0);
  batch.history.Add("a", 5, 15.0);
  REQUIRE(store->Commit(batch).ok());
  const std::vector<double> want_a{7, 8, 9, 10, 11, 12, 13, 14.5, 15};
  for (int compacted = 0; compacted < 2; ++compacted) {
    INFO("compacted " << compacted);
    Result<HistorySlice> a = store->HistoryTail("a", 100);
    REQUIRE(a.ok());
    CHECK(a->first_step == -3);
    CHECK(a->values == want_a);
    Result<HistorySlice> b = store->HistoryTail("b", 2);
    REQUIRE(b.ok());
    CHECK(b->first_step == 1);
    CHECK(b->values == std::vector<double>{-2, -3});
    REQUIRE(store->CompactHistory().ok());
  }
}

TEST_CASE("a version 4 store's history rows read back after the move to step-keyed rows", "[store]") {
  TempDir dir;
  {
    auto db = RawOpen(dir.File("store.db"));
    REQUIRE(MigrateSchema(*db, 4).ok());
    REQUIRE(db->Exec("INSERT INTO series(id, name, profile, created_ms) VALUES (1, 'a', 'p', 0)").ok());
    // Two rows of a: steps 10..11 (seq 0), then a later row correcting step 11 and adding 12 (seq 1).
    // Runs: zigzag varint first step, varint count, float64 values.
    auto row = [](uint8_t zigzag_first, std::vector<double> values) {
      std::string blob{static_cast<char>(zigzag_first), static_cast<char>(values.size())};
      blob.append(reinterpret_cast<const char*>(values.data()), values.size() * sizeof(double));
      return blob;
    };
    Result<Statement> insert = db->Prepare(
        "INSERT INTO history(series, seq, min_step, max_step, count, format, points) VALUES (1, ?1, ?2, ?3, 2, 2, ?4)");
    REQUIRE(insert.ok());
    REQUIRE(insert->Bind(1, int64_t{0}).Bind(2, int64_t{10}).Bind(3, int64_t{11}).BindBlob(4, row(20, {1, 2})).Run().ok());
    insert->Reset();
    REQUIRE(insert->Bind(1, int64_t{1}).Bind(2, int64_t{11}).Bind(3, int64_t{12}).BindBlob(4, row(22, {5, 3})).Run().ok());
    REQUIRE(db->Exec("UPDATE history_seq SET next_seq = 2").ok());
  }
  auto store = testing::OpenOrDie(testing::TestOptions(dir));
  Result<HistorySlice> a = store->HistoryTail("a", 10);
  REQUIRE(a.ok());
  CHECK(a->first_step == 10);
  CHECK(a->values == std::vector<double>{1, 5, 3});
  a = store->HistoryTail("a", 10, 11);  // through an earlier step: the later row's 11 still wins
  REQUIRE(a.ok());
  CHECK(a->values == std::vector<double>{1, 5});
  // Compaction after the migration continues the seq.
  CommitBatch batch;
  batch.history.Add("a", 12, 4);
  REQUIRE(store->Commit(batch).ok());
  REQUIRE(store->CompactHistory().ok());
  a = store->HistoryTail("a", 2);
  REQUIRE(a.ok());
  CHECK(a->values == std::vector<double>{5, 4});
  store.reset();
  auto db = RawOpen(dir.File("store.db"));
  CHECK(Query(*db, "SELECT min(seq) FROM history WHERE max_step = 12 AND count = 1") == 2);
  // Version 6 put the rows from before it into generation 0 and the compaction above into 1.
  CHECK(Query(*db, "SELECT count(*) FROM history WHERE gen = 0") == 2);
  CHECK(Query(*db, "SELECT gen FROM history WHERE max_step = 12 AND count = 1") == 1);
  CHECK(Query(*db, "SELECT points FROM history_generations WHERE gen = 0") == 4);
}

TEST_CASE("a failing migration step leaves the previous version intact", "[store]") {
  TempDir dir;
  auto db = RawOpen(dir.File("store.db"));
  REQUIRE(MigrateSchema(*db, 1).ok());
  // Occupy a name migration 2 creates, so its CREATE TABLE fails mid-step.
  REQUIRE(db->Exec("CREATE TABLE history(x)").ok());
  Status status = MigrateSchema(*db, LatestSchemaVersion());
  REQUIRE_FALSE(status.ok());
  CHECK(status.message().find("schema version 2") != std::string::npos);
  CHECK(Query(*db, "PRAGMA user_version") == 1);
  CHECK(Query(*db, "SELECT count(*) FROM sqlite_schema WHERE name = 'history_log'") == 0);
  CHECK(db->autocommit());
}

TEST_CASE("a store newer than this build is refused", "[store]") {
  TempDir dir;
  {
    auto db = RawOpen(dir.File("store.db"));
    REQUIRE(MigrateSchema(*db, LatestSchemaVersion()).ok());
    REQUIRE(db->Exec("PRAGMA user_version = " + std::to_string(LatestSchemaVersion() + 1)).ok());
  }
  Result<std::unique_ptr<Store>> store = Store::Open(testing::TestOptions(dir));
  REQUIRE_FALSE(store.ok());
  CHECK(store.status().code() == StatusCode::kUnavailable);
  CHECK(store.status().message().find("newer") != std::string::npos);
}

TEST_CASE("another application's sqlite file is refused, not migrated", "[store]") {
  TempDir dir;
  {
    auto db = RawOpen(dir.File("store.db"));
    REQUIRE(db->Exec("CREATE TABLE customers(id INTEGER)").ok());
  }
  Result<std::unique_ptr<Store>> store = Store::Open(testing::TestOptions(dir));
  REQUIRE_FALSE(store.ok());
  CHECK(store.status().code() == StatusCode::kCorruption);
  CHECK(store.status().message().find("not a plimsoll store") != std::string::npos);
  auto db = RawOpen(dir.File("store.db"));
  CHECK(Query(*db, "SELECT count(*) FROM sqlite_schema WHERE name = 'series'") == 0);
}

TEST_CASE("a file that is not sqlite at all is reported as corruption", "[store]") {
  TempDir dir;
  std::ofstream(dir.File("store.db")) << std::string(8192, 'x');
  Result<std::unique_ptr<Store>> store = Store::Open(testing::TestOptions(dir));
  REQUIRE_FALSE(store.ok());
  INFO(store.status().ToString());
  CHECK(store.status().code() == StatusCode::kCorruption);
}

}  // namespace
}  // namespace plimsoll::store
