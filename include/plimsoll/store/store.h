#pragma once
// Store: plimsoll's durable state in one SQLite file (WAL mode).
//
// The engine owns one read-write Store on its owner thread and hands it a CommitBatch per group
// commit; Commit writes the whole batch in ONE transaction, so the source positions and the
// states they produced become durable together (exactly-once effect on states). Readers (the
// `inspect` verb, HTTP) open their own Store with read_only = true; WAL lets them read while the
// writer commits. Schema, durability levels and failure behaviour: notes/store-docs.md.
//
// Thread-safety: a Store is used by one thread at a time (no internal locking).

#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "plimsoll/base/clock.h"
#include "plimsoll/base/huge_pages.h"
#include "plimsoll/base/status.h"
#include "plimsoll/store/records.h"

namespace plimsoll::store {

// How hard SQLite works to make a commit survive a crash (PRAGMA synchronous, WAL mode).
// Never renumber: the value appears in config and logs.
enum class Synchronous : int {
  // No fsync at all. Survives a process crash (kill -9): the data is in the OS page cache.
  // An OS crash or power cut may lose recent commits and may corrupt the file. Benchmarks only.
  kOff = 0,
  // fsync the WAL at checkpoints, not at each commit. Survives a process crash; a power cut or OS
  // crash can roll back the last commits (positions and states roll back together, so the source
  // re-reads them: exactly-once effect holds, flags may be re-published). The default.
  kNormal = 1,
  // fsync the WAL at every commit: a returned commit survives a power cut too. Costs one fsync
  // (milliseconds on most disks) per group commit.
  kFull = 2,
};

// Returns "off", "normal" or "full".
std::string_view SynchronousName(Synchronous level);
// Parses "off" / "normal" / "full" (case-insensitive); InvalidArgument naming the text otherwise.
Result<Synchronous> ParseSynchronous(std::string_view text);

struct StoreOptions {
  std::string path;  // SQLite file; created (with its -wal/-shm side files) when missing
  Synchronous synchronous = Synchronous::kNormal;
  // Open for reading only: no migration, Commit fails with Unavailable. For `inspect` and HTTP.
  bool read_only = false;
  // SQLite's own wait for a lock held by another connection, per attempt (ms, clamped to 0..60000).
  int busy_timeout_ms = 200;
  // Our retries of a whole transaction that still met SQLITE_BUSY after busy_timeout_ms
  // (clamped to 0..100). Total wait is bounded by roughly retries x (timeout + backoff).
  int busy_retries = 5;
  // Sleep before retry k is min(backoff_initial_ms x 2^k, backoff_max_ms) (ms, >= 0).
  int backoff_initial_ms = 10;
  int backoff_max_ms = 1000;
  // Dead-letter raw records longer than this are truncated (bytes, clamped to 16..1 MiB); the
  // original size is kept in raw_size.
  int dead_letter_max_bytes = 4096;
  // Most values in one compacted history row (clamped to 16..65536). A compaction writes the
  // points the log held as new rows (never rewriting older ones), each packing many series in
  // series order up to this many values (a series with more spans rows). Larger: fewer rows to
  // insert per compaction; a history read still reads only its series' part of a row, but
  // parses the row's whole directory (about 8 bytes a series).
  int history_chunk_points = 8192;
  // Commit moves the history log into packed history rows once it holds this many points
  // (clamped to >= 1000). Higher: fewer generations (a history read probes each once), longer
  // compactions and slower history reads (a read scans the whole log). 3M points of the
  // series-grouped log are ~25 MB, as many bytes as the 1M-point log of schema 2-3 (24 bytes a
  // point) that reads scanned.
  int64_t history_compact_points = 3'000'000;
  // SQLite page size (bytes, a power of two in 512..65536) for a NEW store file; an existing
  // file keeps the size it was created with. 16 KiB instead of SQLite's 4 KiB: a group commit of
  // 100k states or a history blob of megabytes writes a quarter of the WAL frames (each a system
  // call and a checksum), which took the commit of 100k states from ~140 to ~25 ms in a
  // measurement on this project's 2-core VM (DEVELOPERS.md, "Store figures"). Larger pages cost
  // more bytes per commit when few rows change.
  int page_bytes = 16 * 1024;
  // SQLite page cache (KiB). Bigger keeps more of the state table in memory.
  int cache_kib = 64 * 1024;
  // WAL pages before SQLite checkpoints into the main file (SQLite's default is 1000; with
  // 16 KiB pages 4000 pages are 64 MiB). Larger: fewer checkpoint pauses, bigger -wal file and
  // slower recovery after a crash.
  int wal_autocheckpoint_pages = 4000;
  Clock* clock = SystemClock();  // measures commit durations; never null
};

// Cumulative figures since Open, for metrics.
struct StoreCounters {
  uint64_t commits = 0;              // successful Commit calls
  uint64_t commit_failures = 0;      // Commit calls that returned an error (batch left with caller)
  uint64_t busy_retries = 0;         // transactions retried after SQLITE_BUSY
  uint64_t rows_written = 0;         // rows inserted or updated by successful commits
  uint64_t states_written = 0;
  uint64_t history_points = 0;
  uint64_t flags_written = 0;
  uint64_t flags_duplicate = 0;      // flags ignored because (series, step) was already stored
  uint64_t alerts_written = 0;
  uint64_t alerts_duplicate = 0;
  uint64_t dead_letters = 0;
  uint64_t compactions = 0;          // history log compactions that succeeded
  uint64_t compaction_failures = 0;  // failed compactions (the log is kept; retried later)
  int64_t last_commit_micros = 0;    // duration of the last successful Commit
  int64_t max_commit_micros = 0;
  // Time this Store spent in successful compactions (CompactHistory, or ApplyCompaction alone
  // when another thread prepared them); the writer commits nothing meanwhile.
  int64_t compaction_micros = 0;
  int64_t max_compaction_micros = 0;  // the longest one
  int64_t log_points = 0;             // history points in the log awaiting compaction
  int64_t wal_frames = 0;             // pages in the WAL after this Store's last commit
  uint64_t wal_checkpoints = 0;       // WAL checkpoints this Store ran (after commits or CheckpointWal)
  int64_t wal_checkpoint_micros = 0;  // their time
  StatusCode last_error = StatusCode::kOk;  // code of the most recent failure
};

// The oldest history-log rows regrouped into the rows of one new history generation
// (Store::PrepareCompaction), ready to be appended by the writing Store (ApplyCompaction). Each
// row packs many series' points in series order (format 3, notes in DEVELOPERS.md, "History").
struct PreparedCompaction {
  struct Row {
    int64_t first_series = 0, last_series = 0;  // series keys of its first and last directory entry
    int64_t min_step = 0, max_step = 0, count = 0;
    size_t offset = 0, bytes = 0;                      // its points blob in `bytes`
    size_t directory_offset = 0, directory_bytes = 0;  // its directory blob in `directories`
  };
  int64_t first_log_seq = 0, last_log_seq = -1;  // the log rows it replaces (the oldest ones)
  int64_t log_rows = 0;
  int64_t points = 0;
  std::vector<Row> rows;                             // in key order (series, then log order)
  std::vector<char, HugePageAllocator<char>> bytes;  // the rows' points blobs back to back
  std::vector<char> directories;                     // the rows' directory blobs back to back
  bool empty() const { return log_rows == 0; }
  // Empties it, keeping its buffers' capacity for the next compaction.
  void Clear();
};

// One series with its current model and state, as loaded at start-up or shown by `inspect`.
struct StoredSeries {
  SeriesRecord series;
  std::optional<ModelRecord> model;
  std::optional<StateRecord> state;
};

// A dead letter as stored: the store's id and the raw record's size before truncation.
struct StoredDeadLetter {
  int64_t id = 0;
  int64_t raw_size = 0;
  DeadLetterRecord record;
};

// The last points of one series on its step grid: values[i] is step first_step + i, NaN where no
// observation was stored (gap steps).
struct HistorySlice {
  int64_t first_step = 0;
  std::vector<double> values;
};

class Store {
 public:
  // Opens (creating and migrating when read-write) the store at options.path; options are
  // validated and clamped here. Fails with the SQLite status (IoError when the file cannot be
  // opened, Corruption for a foreign or damaged file, Unavailable for a read-only file opened
  // read-write or a schema this build cannot read).
  static Result<std::unique_ptr<Store>> Open(StoreOptions options);

  Store(const Store&) = delete;
  Store& operator=(const Store&) = delete;
  ~Store();

  // Writes every record of `batch` in one transaction: all of it becomes durable, or none of it.
  // Retries SQLITE_BUSY (busy_timeout_ms, then busy_retries with backoff) and returns Busy after
  // that; IoError (disk full, I/O error), Unavailable (read-only) and InvalidArgument (a record
  // names a series neither stored nor in batch.series) leave nothing written. On any error the
  // batch is untouched, so the caller keeps it and retries. Duplicate flags/alerts are ignored.
  Status Commit(const CommitBatch& batch);

  // Moves up to `max_log_rows` oldest history-log rows (one per commit) into per-series rows,
  // in one transaction; Corruption naming the row when a log row does not parse (nothing moved).
  // Commit calls this itself past history_compact_points unless SetCompactInCommit(false).
  // Equivalent to ApplyCompaction(PrepareCompaction(max_log_rows)).
  Status CompactHistory(int64_t max_log_rows = INT64_MAX);

  // The expensive half of a compaction (reading and regrouping the log), for another thread
  // with its own Store on the same file (read-only is enough): reads up to `max_log_rows`
  // oldest log rows in one read transaction. Empty when the log is. Corruption naming the row
  // when a log row does not parse. `recycled` (an applied compaction) lends its buffers: megabytes
  // of freshly mapped memory cost more to fault in than to fill. This Store keeps its own
  // scratch between calls for the same reason.
  Result<PreparedCompaction> PrepareCompaction(int64_t max_log_rows = INT64_MAX, PreparedCompaction recycled = {});
  // Appends `prepared` as a new generation and deletes the log rows it replaces, in one
  // transaction. Aborted, nothing written, when those are no longer the oldest log rows as
  // prepared (another compaction moved them); Unavailable when read-only.
  Status ApplyCompaction(const PreparedCompaction& prepared);
  // Whether Commit compacts by itself once the log holds history_compact_points points (the
  // default). A writer that prepares compactions on another thread turns this off and watches
  // StoreCounters::log_points.
  void SetCompactInCommit(bool on);

  // Copies the WAL's committed pages into the database file on this connection: a passive
  // checkpoint, which never waits for the writer or readers and leaves what it cannot copy yet.
  // OK without copying when another connection is checkpointing at the time (that one copies
  // them). Unavailable when read-only. Once one has copied the whole WAL, the writer's next commit
  // starts it over; one running beside a busy writer never catches up, so a writer that leaves
  // the bulk to another connection finishes with a checkpoint of its own (stream::CommitWriter).
  Status CheckpointWal();
  // Whether the writer checkpoints the WAL itself once a commit leaves it holding
  // wal_autocheckpoint_pages pages (the default, as SQLite's own auto-checkpoint). After a large
  // commit one held the writer ~0.2 s in a measurement on the project's VM (DEVELOPERS.md, "Store
  // figures"); a writer with another connection copying the bulk turns this off and watches
  // StoreCounters::wal_frames.
  void SetCheckpointInCommit(bool on);

  // Calls `visit` for every series in id order with its model and state (start-up load).
  // Stops and returns the first non-OK status `visit` returns.
  Status ForEachSeries(const std::function<Status(const StoredSeries&)>& visit);

  // One series with its model and state; NotFound naming the series when it is not stored.
  Result<StoredSeries> GetSeries(std::string_view name);

  // Series in name order, starting after `after_name` (empty: from the start), at most `limit`;
  // states are omitted (StoredSeries::state holds step and time but an empty `encoded`).
  Result<std::vector<StoredSeries>> ListSeries(size_t limit, std::string_view after_name = {});

  // Newest first, at most `limit`. `series` empty means all series. NotFound for an unknown series.
  Result<std::vector<FlagRecord>> RecentFlags(std::string_view series, size_t limit);
  Result<std::vector<AlertRecord>> RecentAlerts(std::string_view series, size_t limit);
  Result<std::vector<EventRecord>> RecentEvents(std::string_view series, size_t limit);
  Result<std::vector<StoredDeadLetter>> RecentDeadLetters(size_t limit);

  // The last `n` steps of a series' history ending at its newest stored step no later than
  // `through_step`, compacted chunks and the not-yet-compacted log together. History can be
  // durable ahead of the series' checkpoint (see stream::DaemonOptions::checkpoint_ms); a restore
  // passes the checkpoint's step. Empty slice when the series has no history there; NotFound for
  // an unknown series.
  Result<HistorySlice> HistoryTail(std::string_view series, size_t n, int64_t through_step = INT64_MAX);

  // Records an explicit refit request for the series matching `pattern` (table refit_requests).
  // Unavailable when read-only; Busy after the retries when the file stays locked.
  Status AddRefitRequest(std::string_view pattern, std::string_view reason, int64_t requested_ms);
  // Reads and deletes every pending refit request in one transaction, oldest first.
  Result<std::vector<RefitRequestRecord>> TakeRefitRequests();
  // Records that `series` is now modelled under `profile` (after a refit for a changed profile).
  // NotFound for an unknown series; Unavailable when read-only.
  Status SetSeriesProfile(std::string_view series, std::string_view profile);

  // The stored next offset of a stream partition, or nullopt when none is stored (the
  // plimsoll::stream::PositionLookup contract). Served from memory; never touches the file.
  std::optional<int64_t> StoredPosition(std::string_view stream, int32_t partition) const;
  // Every stored position, ordered by (stream, partition).
  std::vector<PositionRecord> Positions() const;

  const StoreCounters& counters() const;
  const StoreOptions& options() const;  // as validated and clamped by Open

  // Test hook: the next Commit fails with `status` after writing `rows` rows inside its
  // transaction (which is rolled back, as for a real mid-commit failure). One-shot.
  void TEST_FailNextCommitAfterRows(int64_t rows, Status status);
  // Test hook: caps the file at `pages` pages (PRAGMA max_page_count) so writes hit SQLITE_FULL
  // as on a full disk; 0 removes the cap.
  Status TEST_LimitPages(int64_t pages);

 private:
  class Impl;
  explicit Store(std::unique_ptr<Impl> impl);

  std::unique_ptr<Impl> impl_;
};

}  // namespace plimsoll::store
