// Store group-commit throughput: how many dirty states, history points and positions one SQLite
// transaction per group commit can absorb, with synchronous NORMAL and FULL (WAL mode). Also the
// history compaction rate and the start-up load rate. Measures and prints; asserts nothing.
//
// JSON keys (per second figures are wall-clock over the timed commits only):
//   commit_states_per_s        states upserted per second in mixed commits (states + history +
//                              position), synchronous NORMAL
//   commit_states_per_s_full   the same with synchronous FULL
//   full_over_normal           ratio of the two
//   commit_states_per_cpu_s    mixed-commit states per CPU second spent inside Commit (NORMAL),
//                              less sensitive to other load on a shared machine
//   states_only_per_s          states per second in states-only commits (NORMAL)
//   raw_sqlite_upserts_per_s   bare sqlite3 upserts of the same rows in the same run (NORMAL)
//   store_over_raw             states_only_per_s / raw_sqlite_upserts_per_s: the store's overhead
//   states_only_per_cpu_s, raw_sqlite_upserts_per_cpu_s, store_over_raw_cpu: the same per CPU
//                              second of this process (the steadier ratio on a loaded machine)
//   history_points_per_s       history points appended per second, history-only commits, NORMAL
//   compact_points_per_s       history log points moved into per-series chunks per second
//   load_series_per_s          series (with model-less 256-byte states) read back at start-up
//   commit_ms_mean / commit_ms_max   mixed-commit duration, NORMAL
//   runs: one entry per (synchronous level, workload): commits, records_per_commit, items (what
//         items_per_s counts: states or points), items_per_s, commit_ms_mean, commit_ms_max.

#include <stdlib.h>

#include <algorithm>
#include <chrono>
#include <cstring>
#include <filesystem>
#include <random>
#include <string>
#include <vector>

#include <sqlite3.h>

#include <time.h>

#include "bench/bench.h"
#include "plimsoll/store/store.h"

namespace plimsoll::bench {
namespace {

using store::CommitBatch;
using store::Store;
using store::StoreOptions;
using store::Synchronous;

double Seconds(std::chrono::steady_clock::duration d) { return std::chrono::duration<double>(d).count(); }

std::string Name(int64_t i) { return "queue-" + std::to_string(i); }

std::string Blob(std::mt19937_64& rng) {
  std::string out(256, '\0');
  for (size_t i = 0; i < out.size(); i += 8) {
    uint64_t r = rng();
    std::memcpy(out.data() + i, &r, 8);
  }
  return out;
}

class BenchDir {
 public:
  BenchDir() {
    std::string pattern = (std::filesystem::temp_directory_path() / "plimsoll-bench-XXXXXX").string();
    if (mkdtemp(pattern.data()) == nullptr) throw std::runtime_error("mkdtemp failed");
    path_ = pattern;
  }
  ~BenchDir() {
    std::error_code ignored;
    std::filesystem::remove_all(path_, ignored);
  }
  std::string File() const { return (path_ / "bench.db").string(); }

 private:
  std::filesystem::path path_;
};

std::unique_ptr<Store> OpenStore(const std::string& path, Synchronous sync) {
  StoreOptions options;
  options.path = path;
  options.synchronous = sync;
  options.history_compact_points = INT64_MAX / 2;  // compaction is timed on its own
  Result<std::unique_ptr<Store>> store = Store::Open(options);
  if (!store.ok()) throw std::runtime_error(store.status().ToString());
  return std::move(store.value());
}

void Check(const Status& status) {
  if (!status.ok()) throw std::runtime_error(status.ToString());
}

struct LevelFigures {
  double states_per_s = 0, states_per_cpu_s = 0, states_only_per_s = 0, states_only_per_cpu_s = 0;
  double raw_per_s = 0, raw_per_cpu_s = 0, history_per_s = 0;
  double compact_per_s = 0, load_per_s = 0, mean_ms = 0, max_ms = 0;
};

// CPU time of this process (user + system): on a shared machine, less disturbed by other load
// than wall-clock time. Background I/O done by the kernel's writeback is not counted.
double CpuSeconds() {
  timespec t{};
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &t);
  return static_cast<double>(t.tv_sec) + static_cast<double>(t.tv_nsec) * 1e-9;
}

struct Rate {
  double per_s = 0;      // wall clock
  double per_cpu_s = 0;  // process CPU time
};

// Baseline in the same run: bare sqlite3 upserts of the same rows (same table shape, pragmas,
// one transaction per `dirty` rows), so store/raw is a ratio that other load on the machine
// affects alike.
Rate RawSqliteUpserts(Synchronous sync, int64_t series, int64_t dirty, int commits) {
  BenchDir dir;
  sqlite3* db = nullptr;
  if (sqlite3_open(dir.File().c_str(), &db) != SQLITE_OK) throw std::runtime_error("raw sqlite open failed");
  const std::string setup = "PRAGMA journal_mode = WAL; PRAGMA synchronous = " +
                            std::string(store::SynchronousName(sync)) +
                            "; PRAGMA cache_size = -65536; PRAGMA wal_autocheckpoint = 4000;"
                            "CREATE TABLE state(series INTEGER PRIMARY KEY, step INTEGER NOT NULL, "
                            "time_ms INTEGER NOT NULL, encoded BLOB NOT NULL);";
  sqlite3_exec(db, setup.c_str(), nullptr, nullptr, nullptr);
  sqlite3_stmt* stmt = nullptr;
  sqlite3_prepare_v2(db,
                     "INSERT INTO state(series, step, time_ms, encoded) VALUES (?1, ?2, ?3, ?4) ON CONFLICT(series) "
                     "DO UPDATE SET step = excluded.step, time_ms = excluded.time_ms, encoded = excluded.encoded",
                     -1, &stmt, nullptr);
  std::mt19937_64 rng(7);
  std::vector<std::string> blobs;
  for (int64_t i = 0; i < dirty; ++i) blobs.push_back(Blob(rng));
  auto upsert = [&](int64_t id, int64_t step, const std::string& blob) {
    sqlite3_bind_int64(stmt, 1, id);
    sqlite3_bind_int64(stmt, 2, step);
    sqlite3_bind_int64(stmt, 3, step * 60'000);
    sqlite3_bind_blob(stmt, 4, blob.data(), static_cast<int>(blob.size()), SQLITE_STATIC);
    sqlite3_step(stmt);
    sqlite3_reset(stmt);
  };
  sqlite3_exec(db, "BEGIN", nullptr, nullptr, nullptr);
  for (int64_t i = 0; i < series; ++i) upsert(i, 0, blobs[static_cast<size_t>(i % dirty)]);
  sqlite3_exec(db, "COMMIT", nullptr, nullptr, nullptr);
  double total = 0, cpu = 0;
  for (int c = 0; c < commits; ++c) {
    auto start = std::chrono::steady_clock::now();
    const double cpu_start = CpuSeconds();
    sqlite3_exec(db, "BEGIN IMMEDIATE", nullptr, nullptr, nullptr);
    for (int64_t j = 0; j < dirty; ++j) upsert((c * dirty + j) % series, c + 1, blobs[static_cast<size_t>(j)]);
    if (sqlite3_exec(db, "COMMIT", nullptr, nullptr, nullptr) != SQLITE_OK) throw std::runtime_error("raw commit");
    cpu += CpuSeconds() - cpu_start;
    total += Seconds(std::chrono::steady_clock::now() - start);
  }
  sqlite3_finalize(stmt);
  sqlite3_close(db);
  const double rows = static_cast<double>(dirty * commits);
  return Rate{rows / total, rows / cpu};
}

LevelFigures RunLevel(Synchronous sync, int64_t series, int64_t dirty, int commits, int64_t history_points,
                      BenchReport& report) {
  BenchDir dir;
  auto store = OpenStore(dir.File(), sync);
  std::mt19937_64 rng(42);
  const std::string level(store::SynchronousName(sync));

  // Every series exists with a state before timing starts, as in a running daemon.
  CommitBatch batch;
  for (int64_t i = 0; i < series; ++i) {
    batch.series.push_back({Name(i), "bench", 0});
    batch.states.push_back({Name(i), 0, 0, Blob(rng)});
  }
  Check(store->Commit(batch));

  // Mixed commits: `dirty` states (a sliding window over the series), one history point each,
  // and the source position.
  LevelFigures f;
  double total = 0, cpu = 0;
  for (int c = 0; c < commits; ++c) {
    batch.Clear();
    for (int64_t j = 0; j < dirty; ++j) {
      const int64_t i = (c * dirty + j) % series;
      batch.states.push_back({Name(i), c + 1, (c + 1) * 60'000, Blob(rng)});
      batch.history.Add(Name(i), c + 1, static_cast<double>(j));
    }
    batch.positions.push_back({"kafka:calls", 0, (c + 1) * dirty});
    auto start = std::chrono::steady_clock::now();
    const double cpu_start = CpuSeconds();
    Check(store->Commit(batch));
    cpu += CpuSeconds() - cpu_start;
    const double s = Seconds(std::chrono::steady_clock::now() - start);
    total += s;
    f.max_ms = std::max(f.max_ms, s * 1e3);
  }
  f.states_per_s = static_cast<double>(dirty * commits) / total;
  f.states_per_cpu_s = static_cast<double>(dirty * commits) / cpu;
  f.mean_ms = total / commits * 1e3;
  report.rows.push_back({{"synchronous", level}, {"workload", std::string("states+history+position")},
                         {"commits", int64_t{commits}}, {"records_per_commit", dirty * 2 + 1},
                         {"items", std::string("states")}, {"items_per_s", f.states_per_s}, {"commit_ms_mean", f.mean_ms},
                         {"commit_ms_max", f.max_ms}});

  // States-only commits: the same shape as the raw SQLite baseline.
  double states_total = 0, states_max_ms = 0, states_cpu = 0;
  for (int c = 0; c < commits; ++c) {
    batch.Clear();
    for (int64_t j = 0; j < dirty; ++j) {
      const int64_t i = (c * dirty + j) % series;
      batch.states.push_back({Name(i), commits + c + 1, 0, Blob(rng)});
    }
    auto start = std::chrono::steady_clock::now();
    const double cpu_start = CpuSeconds();
    Check(store->Commit(batch));
    states_cpu += CpuSeconds() - cpu_start;
    const double s = Seconds(std::chrono::steady_clock::now() - start);
    states_total += s;
    states_max_ms = std::max(states_max_ms, s * 1e3);
  }
  f.states_only_per_s = static_cast<double>(dirty * commits) / states_total;
  f.states_only_per_cpu_s = static_cast<double>(dirty * commits) / states_cpu;
  report.rows.push_back({{"synchronous", level}, {"workload", std::string("states only")},
                         {"commits", int64_t{commits}}, {"records_per_commit", dirty},
                         {"items", std::string("states")}, {"items_per_s", f.states_only_per_s},
                         {"commit_ms_mean", states_total / commits * 1e3}, {"commit_ms_max", states_max_ms}});
  const Rate raw = RawSqliteUpserts(sync, series, dirty, commits);
  f.raw_per_s = raw.per_s;
  f.raw_per_cpu_s = raw.per_cpu_s;
  report.rows.push_back({{"synchronous", level}, {"workload", std::string("bare sqlite3 upserts")},
                         {"commits", int64_t{commits}}, {"records_per_commit", dirty},
                         {"items", std::string("states")}, {"items_per_s", f.raw_per_s},
                         {"commit_ms_mean", static_cast<double>(dirty) / f.raw_per_s * 1e3},
                         {"commit_ms_max", 0.0}});

  // History-only commits: one packed log row per commit.
  double history_total = 0, history_max_ms = 0;
  for (int c = 0; c < commits; ++c) {
    batch.Clear();
    for (int64_t j = 0; j < history_points; ++j) {
      batch.history.Add(Name(j % series), 1000 + c * (history_points / series + 1) + j / series, 1.0);
    }
    auto start = std::chrono::steady_clock::now();
    Check(store->Commit(batch));
    const double s = Seconds(std::chrono::steady_clock::now() - start);
    history_total += s;
    history_max_ms = std::max(history_max_ms, s * 1e3);
  }
  f.history_per_s = static_cast<double>(history_points * commits) / history_total;
  report.rows.push_back({{"synchronous", level}, {"workload", std::string("history only")},
                         {"commits", int64_t{commits}}, {"records_per_commit", history_points},
                         {"items", std::string("points")}, {"items_per_s", f.history_per_s}, {"commit_ms_mean", history_total / commits * 1e3},
                         {"commit_ms_max", history_max_ms}});

  // Compaction of everything the log holds now.
  const int64_t logged = dirty * commits + history_points * commits;
  auto start = std::chrono::steady_clock::now();
  Check(store->CompactHistory());
  f.compact_per_s = static_cast<double>(logged) / Seconds(std::chrono::steady_clock::now() - start);

  // Start-up load from a fresh connection.
  store.reset();
  store = OpenStore(dir.File(), sync);
  int64_t loaded = 0;
  start = std::chrono::steady_clock::now();
  Check(store->ForEachSeries([&](const store::StoredSeries& s) {
    loaded += s.state.has_value();
    return Status::Ok();
  }));
  f.load_per_s = static_cast<double>(loaded) / Seconds(std::chrono::steady_clock::now() - start);
  return f;
}

BenchReport RunStoreBench(const BenchArgs& args) {
  const int64_t series = args.quick ? 5'000 : 100'000;
  const int64_t dirty = args.quick ? 2'000 : 10'000;
  const int commits = args.quick ? 3 : 20;
  const int64_t history_points = args.quick ? 20'000 : 200'000;
  BenchReport report;
  report.rows_key = "runs";
  LevelFigures normal = RunLevel(Synchronous::kNormal, series, dirty, commits, history_points, report);
  LevelFigures full = RunLevel(Synchronous::kFull, series, dirty, commits, history_points, report);
  report.Add("series", series);
  report.Add("dirty_states_per_commit", dirty);
  report.Add("state_bytes", int64_t{256});
  report.Add("commit_states_per_s", normal.states_per_s);
  report.Add("commit_states_per_s_full", full.states_per_s);
  report.Add("full_over_normal", full.states_per_s / normal.states_per_s);
  report.Add("commit_states_per_cpu_s", normal.states_per_cpu_s);
  report.Add("states_only_per_s", normal.states_only_per_s);
  report.Add("raw_sqlite_upserts_per_s", normal.raw_per_s);
  report.Add("store_over_raw", normal.states_only_per_s / normal.raw_per_s);
  report.Add("states_only_per_cpu_s", normal.states_only_per_cpu_s);
  report.Add("raw_sqlite_upserts_per_cpu_s", normal.raw_per_cpu_s);
  report.Add("store_over_raw_cpu", normal.states_only_per_cpu_s / normal.raw_per_cpu_s);
  report.Add("history_points_per_s", normal.history_per_s);
  report.Add("history_points_per_s_full", full.history_per_s);
  report.Add("compact_points_per_s", normal.compact_per_s);
  report.Add("load_series_per_s", normal.load_per_s);
  report.Add("commit_ms_mean", normal.mean_ms);
  report.Add("commit_ms_max", normal.max_ms);
  report.notes.push_back("mixed commit = dirty states (256-byte blobs) + one history point per state + one position");
  report.notes.push_back("files in the system temp dir; figures depend on its disk and on other load");
  return report;
}

PLIMSOLL_BENCH("store", "SQLite group commit: states, history points, positions per second (NORMAL vs FULL)",
               RunStoreBench);

}  // namespace
}  // namespace plimsoll::bench
