#include "plimsoll/store/store.h"

#include <spdlog/spdlog.h>

#include <algorithm>
#include <bit>
#include <chrono>
#include <cmath>
#include <cstring>
#include <map>
#include <span>
#include <thread>
#include <unordered_map>

#include "plimsoll/base/huge_pages.h"
#include "store/schema.h"
#include "store/sqlite.h"

namespace plimsoll::store {
namespace {

// History blobs are native little-endian arrays; refuse to build where that would not hold.
static_assert(std::endian::native == std::endian::little, "history blobs assume a little-endian host");

// history_log.format 1 (schema 2-3): one 24-byte entry per point: series key, step, value.
constexpr size_t kLogPointBytes = 3 * sizeof(int64_t);
// history_log.format 2 (schema 4): runs grouped by series, each a varint series key, a zigzag
// varint first step, a varint count and `count` float64 values for consecutive steps (~8-9 bytes
// a point instead of 24). See notes/store-docs.md.
constexpr int64_t kLogFormatPoints = 1;
constexpr int64_t kLogFormatRuns = 2;

struct StringHash {
  using is_transparent = void;
  size_t operator()(std::string_view s) const { return std::hash<std::string_view>{}(s); }
};

// Counts of one batch, applied to StoreCounters only when its transaction commits.
struct Tally {
  int64_t rows = 0;
  uint64_t states = 0, history = 0, flags = 0, flags_duplicate = 0, alerts = 0, alerts_duplicate = 0, dead = 0;
};

std::string_view AlertKindText(AlertKind kind) { return kind == AlertKind::kRaised ? "raised" : "cleared"; }

double RealOrNaN(const Statement& stmt, int col) { return stmt.IsNull(col) ? kNoValue : stmt.Real(col); }

// Writes `v` as a varint (7 bits a byte, low first) into a buffer with room for 10 bytes;
// returns the end of what it wrote.
char* PutVarintTo(char* out, uint64_t v) {
  while (v >= 0x80) {
    *out++ = static_cast<char>((v & 0x7F) | 0x80);
    v >>= 7;
  }
  *out++ = static_cast<char>(v);
  return out;
}

void PutVarint(std::string& out, uint64_t v) {
  char bytes[10];
  out.append(bytes, PutVarintTo(bytes, v));
}

bool GetVarint(std::string_view blob, size_t& at, uint64_t& v) {
  v = 0;
  for (int shift = 0; shift < 64 && at < blob.size(); shift += 7) {
    const auto byte = static_cast<uint8_t>(blob[at++]);
    v |= uint64_t{byte & 0x7Fu} << shift;
    if ((byte & 0x80) == 0) return true;
  }
  return false;
}

uint64_t ZigZag(int64_t v) { return (static_cast<uint64_t>(v) << 1) ^ static_cast<uint64_t>(v >> 63); }
int64_t UnZigZag(uint64_t v) { return static_cast<int64_t>(v >> 1) ^ -static_cast<int64_t>(v & 1); }

// A run is [varint series key, when keyed (log rows)] zigzag varint first step, varint count,
// then `count` float64 values. Writes the header into a buffer with room for kRunHeaderMaxBytes;
// returns the end of what it wrote.
constexpr size_t kRunHeaderMaxBytes = 3 * 10;
char* PutRunHeaderTo(char* out, std::optional<int64_t> series, int64_t first_step, size_t count) {
  if (series) out = PutVarintTo(out, static_cast<uint64_t>(*series));
  out = PutVarintTo(out, ZigZag(first_step));
  return PutVarintTo(out, count);
}

// Calls run(first_step, values, count) for each run of a `history` row (format 2: runs without
// the series key; format 1: one run of `count` values from min_step, a chunk of schema 2-3).
// Corruption naming the series and row when the blob does not parse.
template <typename Fn>
Status ForEachHistoryRun(int64_t series, int64_t seq, int64_t format, int64_t min_step, std::string_view blob, Fn run) {
  auto damaged = [&](size_t at) {
    return Status::Corruption("history row (series " + std::to_string(series) + ", seq " + std::to_string(seq) +
                              ") is damaged at byte " + std::to_string(at));
  };
  if (format == kLogFormatPoints) {
    if (blob.size() % sizeof(double) != 0) return damaged(0);
    if (!blob.empty()) run(min_step, blob.data(), blob.size() / sizeof(double));
    return Status::Ok();
  }
  if (format != kLogFormatRuns) return damaged(0);
  for (size_t at = 0; at < blob.size();) {
    uint64_t first = 0, count = 0;
    if (!GetVarint(blob, at, first) || !GetVarint(blob, at, count) || count == 0 ||
        count > (blob.size() - at) / sizeof(double))
      return damaged(at);
    run(UnZigZag(first), blob.data() + at, static_cast<size_t>(count));
    at += static_cast<size_t>(count) * sizeof(double);
  }
  return Status::Ok();
}

// Calls run(series, first_step, values, count) for each run of a history_log row, in row order
// (a later run's value for the same step wins); `values` points at `count` packed float64s.
// Corruption naming the row when the blob does not parse.
template <typename Fn>
Status ForEachLogRun(int64_t seq, int64_t format, std::string_view blob, Fn run) {
  if (format == kLogFormatPoints) {
    for (size_t at = 0; at + kLogPointBytes <= blob.size(); at += kLogPointBytes) {
      int64_t series = 0, step = 0;
      std::memcpy(&series, blob.data() + at, 8);
      std::memcpy(&step, blob.data() + at + 8, 8);
      run(series, step, blob.data() + at + 16, size_t{1});
    }
    return Status::Ok();
  }
  if (format != kLogFormatRuns)
    return Status::Corruption("history_log row " + std::to_string(seq) + " has unknown format " +
                              std::to_string(format));
  for (size_t at = 0; at < blob.size();) {
    uint64_t series = 0, first = 0, count = 0;
    if (!GetVarint(blob, at, series) || !GetVarint(blob, at, first) || !GetVarint(blob, at, count) || count == 0 ||
        count > (blob.size() - at) / sizeof(double))
      return Status::Corruption("history_log row " + std::to_string(seq) + " is damaged at byte " +
                                std::to_string(at));
    run(static_cast<int64_t>(series), UnZigZag(first), blob.data() + at, static_cast<size_t>(count));
    at += static_cast<size_t>(count) * sizeof(double);
  }
  return Status::Ok();
}

double ValueAt(const char* values, size_t i) {
  double v = 0;
  std::memcpy(&v, values + i * sizeof(double), sizeof v);
  return v;
}

// A batch row with its resolved series key, for writing rows in primary-key order.
struct KeyedRow {
  int64_t key, step;
  size_t index;  // into the batch's list
  static bool ByKey(const KeyedRow& a, const KeyedRow& b) { return a.key != b.key ? a.key < b.key : a.step < b.step; }
  static bool ByStep(const KeyedRow& a, const KeyedRow& b) { return a.step != b.step ? a.step < b.step : a.key < b.key; }
};

// One run of a history log row during compaction, grouped by series (its place in the grouped
// array says which): `count` values for consecutive steps from `first_step`, at byte `offset` of
// the compaction's copy of the log blobs.
struct SortedRun {
  int64_t first_step;
  uint64_t offset, count;
};

// history.format 3 (schema 7): one row of a compaction generation packing many series. Its
// `directory` blob lists the series in key order, each with its step range, value count and the
// byte length of its segment; the `points` blob holds the segments in that order, each a sequence
// of format-2 runs without the series key (a later run's value for a step wins).
constexpr int64_t kHistoryFormatPack = 3;

// One directory entry of a packed row: the series' segment is `bytes` bytes of the row's points
// from `offset`.
struct PackEntry {
  int64_t series = 0, min_step = 0, max_step = 0, count = 0;
  size_t offset = 0, bytes = 0;
};

// Appends a directory: varint entry count, then per entry zigzag varints of the series key's
// delta from the previous entry's (the first from 0) and of the min step, then varints of
// max step - min step, the count and the segment's bytes.
void PutDirectory(std::vector<char>& out, std::span<const PackEntry> entries) {
  std::string encoded;
  PutVarint(encoded, entries.size());
  int64_t previous = 0;
  for (const PackEntry& e : entries) {
    PutVarint(encoded, ZigZag(e.series - previous));
    PutVarint(encoded, ZigZag(e.min_step));
    PutVarint(encoded, static_cast<uint64_t>(e.max_step - e.min_step));
    PutVarint(encoded, static_cast<uint64_t>(e.count));
    PutVarint(encoded, e.bytes);
    previous = e.series;
  }
  out.insert(out.end(), encoded.begin(), encoded.end());
}

// The entry of `series` in the directory of the packed row `seq` whose points blob has
// `points_bytes` bytes; nullopt when the row holds no points of it. Corruption naming the row when
// the directory does not parse or points outside the blob.
Result<std::optional<PackEntry>> FindPackEntry(int64_t seq, std::string_view directory, size_t points_bytes,
                                               int64_t series) {
  auto damaged = [&](size_t at) {
    return Status::Corruption("history row " + std::to_string(seq) + " has a damaged directory at byte " +
                              std::to_string(at));
  };
  size_t at = 0;
  uint64_t entries = 0;
  if (!GetVarint(directory, at, entries)) return damaged(at);
  PackEntry e;
  for (uint64_t i = 0; i < entries; ++i) {
    uint64_t delta = 0, min_step = 0, span = 0, count = 0, bytes = 0;
    if (!GetVarint(directory, at, delta) || !GetVarint(directory, at, min_step) || !GetVarint(directory, at, span) ||
        !GetVarint(directory, at, count) || !GetVarint(directory, at, bytes))
      return damaged(at);
    e.offset += e.bytes;
    e.series += UnZigZag(delta);
    e.min_step = UnZigZag(min_step);
    e.max_step = e.min_step + static_cast<int64_t>(span);
    e.count = static_cast<int64_t>(count);
    e.bytes = static_cast<size_t>(bytes);
    if (e.bytes > points_bytes - std::min(points_bytes, e.offset)) return damaged(at);
    if (e.series == series) return std::optional<PackEntry>(e);
    if (e.series > series) break;  // key order
  }
  return std::optional<PackEntry>();
}

// Builds the packed rows of one compaction generation from the log's runs, series by series in
// key order: a row takes series until it holds `row_points` values (a series with more continues
// in the next row), and a log run that continues the previous one (the next step) extends it, so a
// series' steps from many commits become one run.
class PackWriter {
 public:
  PackWriter(PreparedCompaction& out, size_t row_points) : out_(out), cap_(static_cast<int64_t>(row_points)) {
    StartRow();
  }
  // `runs` in log order; their values are at log + run.offset.
  void AddSeries(int64_t series, std::span<const SortedRun> runs, const char* log);
  void Finish() { CloseRow(); }

 private:
  void StartRow() {
    row_ = PreparedCompaction::Row{};
    row_.min_step = INT64_MAX, row_.max_step = INT64_MIN;
    row_.offset = out_.bytes.size();
  }
  void CloseRow();

  PreparedCompaction& out_;
  const int64_t cap_;
  PreparedCompaction::Row row_;     // the row being built: its points so far end out_.bytes
  std::vector<PackEntry> entries_;  // its directory so far
};

void PackWriter::AddSeries(int64_t series, std::span<const SortedRun> runs, const char* log) {
  size_t piece = 0;
  uint64_t done = 0;  // the cursor: values of runs[piece] already written
  bool in_row = false;  // whether entries_.back() is this series' segment of the current row
  while (piece < runs.size()) {
    if (row_.count == cap_) CloseRow(), in_row = false;
    if (!in_row) {
      entries_.push_back({series, INT64_MAX, INT64_MIN, 0, out_.bytes.size() - row_.offset, 0});
      in_row = true;
    }
    // The longest stretch of consecutive steps from the cursor that fits the row.
    const auto room = static_cast<uint64_t>(cap_ - row_.count);
    const int64_t first = runs[piece].first_step + static_cast<int64_t>(done);
    uint64_t take = 0, end_done = done;
    size_t end_piece = piece;
    while (end_piece < runs.size() && take < room) {
      const SortedRun& r = runs[end_piece];
      if (end_done == 0 && take > 0 && r.first_step != first + static_cast<int64_t>(take)) break;
      const uint64_t n = std::min(r.count - end_done, room - take);
      take += n, end_done += n;
      if (end_done == r.count) ++end_piece, end_done = 0;
    }
    char header[kRunHeaderMaxBytes];
    out_.bytes.insert(out_.bytes.end(), header, PutRunHeaderTo(header, std::nullopt, first, take));
    while (piece != end_piece || done != end_done) {
      const SortedRun& r = runs[piece];
      const uint64_t stop = piece == end_piece ? end_done : r.count;
      const char* values = log + r.offset;
      out_.bytes.insert(out_.bytes.end(), values + done * sizeof(double), values + stop * sizeof(double));
      if (stop == r.count) {
        ++piece, done = 0;
      } else {
        done = stop;
      }
    }
    const int64_t last = first + static_cast<int64_t>(take) - 1;
    PackEntry& entry = entries_.back();
    entry.min_step = std::min(entry.min_step, first), entry.max_step = std::max(entry.max_step, last);
    entry.count += static_cast<int64_t>(take);
    entry.bytes = out_.bytes.size() - row_.offset - entry.offset;
    row_.min_step = std::min(row_.min_step, first), row_.max_step = std::max(row_.max_step, last);
    row_.count += static_cast<int64_t>(take);
  }
}

void PackWriter::CloseRow() {
  if (row_.count == 0) return;
  row_.first_series = entries_.front().series;
  row_.last_series = entries_.back().series;
  row_.bytes = out_.bytes.size() - row_.offset;
  row_.directory_offset = out_.directories.size();
  PutDirectory(out_.directories, entries_);
  row_.directory_bytes = out_.directories.size() - row_.directory_offset;
  out_.rows.push_back(row_);
  entries_.clear();
  StartRow();
}

constexpr const char* kSeriesSelect =
    "SELECT s.id, s.name, s.profile, s.created_ms, "
    "m.series IS NOT NULL, m.spec, m.period, m.alpha, m.beta, m.gamma, m.phi, m.sigma2, m.loglik, m.aicc, "
    "m.fitted_ms, m.reason, st.series IS NOT NULL, st.step, st.time_ms, st.encoded "
    "FROM series s LEFT JOIN model m ON m.series = s.id LEFT JOIN state st ON st.series = s.id ";

StoredSeries ReadSeriesRow(const Statement& stmt, bool with_state_bytes) {
  StoredSeries out;
  out.series = SeriesRecord{stmt.Text(1), stmt.Text(2), stmt.Int(3)};
  if (stmt.Int(4) != 0) {
    ModelRecord m;
    m.series = out.series.name;
    m.spec = stmt.Text(5);
    m.period = static_cast<int32_t>(stmt.Int(6));
    m.alpha = RealOrNaN(stmt, 7), m.beta = RealOrNaN(stmt, 8), m.gamma = RealOrNaN(stmt, 9);
    m.phi = RealOrNaN(stmt, 10), m.sigma2 = RealOrNaN(stmt, 11), m.loglik = RealOrNaN(stmt, 12);
    m.aicc = RealOrNaN(stmt, 13);
    m.fitted_ms = stmt.Int(14);
    m.reason = stmt.Text(15);
    out.model = std::move(m);
  }
  if (stmt.Int(16) != 0) {
    out.state = StateRecord{out.series.name, stmt.Int(17), stmt.Int(18), with_state_bytes ? stmt.Blob(19) : ""};
  }
  return out;
}

// Steps `stmt` to the end, calling `row(stmt)` (returning Status) for each row.
template <typename Fn>
Status ForEachRow(Statement& stmt, Fn row) {
  for (;;) {
    Result<bool> more = stmt.Step();
    if (!more.ok()) return more.status();
    if (!*more) return Status::Ok();
    PLIMSOLL_RETURN_IF_ERROR(row(stmt));
  }
}

template <typename T>
T Clamp(T value, T lo, T hi) {
  return std::min(std::max(value, lo), hi);
}

}  // namespace

void PreparedCompaction::Clear() {
  first_log_seq = 0, last_log_seq = -1, log_rows = 0, points = 0;
  rows.clear();
  bytes.clear();
  directories.clear();
}

std::string_view SynchronousName(Synchronous level) {
  switch (level) {
    case Synchronous::kOff: return "off";
    case Synchronous::kNormal: return "normal";
    case Synchronous::kFull: return "full";
  }
  return "normal";
}

Result<Synchronous> ParseSynchronous(std::string_view text) {
  std::string lower(text);
  std::transform(lower.begin(), lower.end(), lower.begin(), [](unsigned char c) { return std::tolower(c); });
  for (Synchronous level : {Synchronous::kOff, Synchronous::kNormal, Synchronous::kFull}) {
    if (lower == SynchronousName(level)) return level;
  }
  return Status::InvalidArgument("synchronous level '" + std::string(text) + "' is not one of off, normal, full");
}

class Store::Impl {
 public:
  Impl(StoreOptions options, std::unique_ptr<SqliteDb> db) : options_(std::move(options)), db_(std::move(db)) {}

  Status Load();
  Status LoadSeriesKeys();
  Status Commit(const CommitBatch& batch);
  Status CompactHistory(int64_t max_log_rows);
  Result<PreparedCompaction> PrepareCompaction(int64_t max_log_rows, PreparedCompaction recycled);
  // `started_ns`: when the compaction's work on this Store began (its time goes to the counters).
  Status ApplyCompaction(const PreparedCompaction& prepared, int64_t started_ns);
  bool compact_in_commit_ = true;
  bool checkpoint_in_commit_ = true;
  Status CheckpointWal();
  // SQLite's WAL hook on a read-write connection, installed instead of its auto-checkpoint (which
  // does the same when on): notes the WAL's length after each commit and checkpoints once it
  // reaches wal_autocheckpoint_pages while checkpoint_in_commit_.
  static int OnWalCommit(void* self, sqlite3* db, const char* schema, int frames);
  Status ForEachSeries(const std::function<Status(const StoredSeries&)>& visit);
  Result<StoredSeries> GetSeries(std::string_view name);
  Result<std::vector<StoredSeries>> ListSeries(size_t limit, std::string_view after_name);
  Result<std::vector<FlagRecord>> RecentFlags(std::string_view series, size_t limit);
  Result<std::vector<AlertRecord>> RecentAlerts(std::string_view series, size_t limit);
  Result<std::vector<EventRecord>> RecentEvents(std::string_view series, size_t limit);
  Result<std::vector<StoredDeadLetter>> RecentDeadLetters(size_t limit);
  Result<HistorySlice> HistoryTail(std::string_view series, size_t n, int64_t through_step);
  Status AddRefitRequest(std::string_view pattern, std::string_view reason, int64_t requested_ms);
  Result<std::vector<RefitRequestRecord>> TakeRefitRequests();
  Status SetSeriesProfile(std::string_view series, std::string_view profile);
  std::optional<int64_t> StoredPosition(std::string_view stream, int32_t partition) const;
  std::vector<PositionRecord> Positions() const;

  StoreOptions options_;
  std::unique_ptr<SqliteDb> db_;
  StoreCounters counters_;
  int64_t fail_after_rows_ = -1;  // TEST_ hook; -1 when disarmed
  Status fail_status_;

 private:
  // Runs `body` inside BEGIN IMMEDIATE ... COMMIT, rolling back on any error and retrying the
  // whole transaction when it met SQLITE_BUSY. `undo` restores in-memory caches after a rollback.
  template <typename Body, typename Undo>
  Status RunTransaction(std::string_view what, Body body, Undo undo);
  Status WriteBatch(const CommitBatch& batch, Tally& tally);
  Status CountRow(Tally& tally);
  // `unnamed_ok`: an empty name takes its hint's committed series (history entries only, records.h).
  Result<int64_t> Resolve(std::string_view name, std::string_view what, uint32_t hint = kNoHint,
                          bool unnamed_ok = false);
  Result<int64_t> LookupSeries(std::string_view name);
  Result<PreparedCompaction> ReadAndRegroupLog(int64_t max_log_rows, PreparedCompaction out);

  // Series name -> integer key for the writer; rolled back with the transaction that added names.
  // Read at the first commit (LoadSeriesKeys), not at Open: readers and the upkeep connection,
  // which never commit, would hold a copy of every name (100k at 100k series) for nothing.
  std::unordered_map<std::string, int64_t, StringHash, std::equal_to<>> series_ids_;
  bool series_keys_loaded_ = false;
  std::vector<std::string> added_names_;
  // A short name is copied into the entry, so a hit costs one cache line, not a second one for
  // the map node; a longer one is compared through the node's string.
  struct Hinted {
    static constexpr size_t kInline = 20;
    Hinted() = default;
    Hinted(const std::string* interned, int64_t series_key) : name(interned), key(series_key) {
      size = static_cast<uint32_t>(interned->size());
      if (size <= kInline) std::memcpy(text, interned->data(), size);
    }
    bool Names(std::string_view candidate) const {
      if (name == nullptr || candidate.size() != size) return false;
      return size <= kInline ? std::memcmp(text, candidate.data(), size) == 0 : *name == candidate;
    }
    const std::string* name = nullptr;  // the key string inside series_ids_ (stable while present)
    int64_t key = 0;
    uint32_t size = 0;
    char text[kInline] = {};
  };
  std::vector<Hinted> hinted_;  // by hint (records.h, kNoHint)
  std::map<std::pair<std::string, int32_t>, int64_t, std::less<>> positions_;
  int64_t log_points_ = 0;  // points in history_log awaiting compaction
  int64_t next_history_seq_ = 0;  // history.seq of the next row compaction writes (history_seq.next_seq)
  std::unique_ptr<char[]> pack_buffer_;  // WriteBatch: the history log row being built
  size_t pack_capacity_ = 0;
  std::vector<int64_t> history_keys_;  // WriteBatch: the series key of each batch.history.series entry
  std::vector<KeyedRow> keyed_;        // WriteBatch: states / flags in primary-key order
  // ReadAndRegroupLog's scratch, kept between compactions: its buffers are tens of megabytes.
  std::vector<char, HugePageAllocator<char>> log_copy_;                // the log rows' blobs back to back
  std::vector<SortedRun, HugePageAllocator<SortedRun>> sorted_runs_;  // their runs grouped by series
  std::vector<size_t> series_run_starts_;  // by series key: its first run in sorted_runs_ (counting sort)
  std::vector<size_t> series_run_cursor_;
};

Status Store::Impl::LoadSeriesKeys() {
  if (series_keys_loaded_) return Status::Ok();
  Result<Statement> ids = db_->Prepare("SELECT id, name FROM series");
  if (!ids.ok()) return ids.status();
  PLIMSOLL_RETURN_IF_ERROR(ForEachRow(*ids, [&](const Statement& row) {
    series_ids_.emplace(row.Text(1), row.Int(0));
    return Status::Ok();
  }));
  series_keys_loaded_ = true;
  return Status::Ok();
}

Status Store::Impl::Load() {
  Result<int64_t> pending = db_->QueryInt("SELECT coalesce(sum(count), 0) FROM history_log");
  if (!pending.ok()) return pending.status();
  log_points_ = *pending;
  counters_.log_points = log_points_;
  Result<int64_t> seq = db_->QueryInt("SELECT next_seq FROM history_seq");
  if (!seq.ok()) return seq.status();
  next_history_seq_ = *seq;
  Result<Statement> positions = db_->Prepare("SELECT stream, partition, next_offset FROM source_positions");
  if (!positions.ok()) return positions.status();
  return ForEachRow(*positions, [&](const Statement& row) {
    positions_[{row.Text(0), static_cast<int32_t>(row.Int(1))}] = row.Int(2);
    return Status::Ok();
  });
}

template <typename Body, typename Undo>
Status Store::Impl::RunTransaction(std::string_view what, Body body, Undo undo) {
  for (int attempt = 0;; ++attempt) {
    Status status = db_->Exec("BEGIN IMMEDIATE");
    if (status.ok()) status = body();
    if (status.ok()) status = db_->Exec("COMMIT");
    if (status.ok()) return status;
    // SQLite rolls back by itself after some errors (e.g. SQLITE_FULL); roll back the rest.
    if (!db_->autocommit()) IgnoreError(db_->Exec("ROLLBACK"));  // the first error is the one to report
    undo();
    if (status.code() != StatusCode::kBusy || attempt >= options_.busy_retries) {
      return status.WithContext(std::string(what) + " in '" + db_->path() + "'");
    }
    ++counters_.busy_retries;
    int64_t backoff = std::min<int64_t>(int64_t{options_.backoff_initial_ms} << std::min(attempt, 20),
                                        options_.backoff_max_ms);
    spdlog::warn("store: {} met a lock held by another connection; retry {}/{} in {} ms: {}", what, attempt + 1,
                 options_.busy_retries, backoff, status.ToString());
    std::this_thread::sleep_for(std::chrono::milliseconds(backoff));
  }
}

Status Store::Impl::CountRow(Tally& tally) {
  ++tally.rows;
  if (fail_after_rows_ >= 0 && tally.rows >= fail_after_rows_) {
    fail_after_rows_ = -1;
    return fail_status_;
  }
  return Status::Ok();
}

Result<int64_t> Store::Impl::Resolve(std::string_view name, std::string_view what, uint32_t hint, bool unnamed_ok) {
  // A hint remembers the key and the interned name it resolved to: one comparison instead of a
  // hash and a walk through the map (the lookups were a fifth of the writer's time at 100k series).
  if (hint < hinted_.size() && hinted_[hint].Names(name)) return hinted_[hint].key;
  if (name.empty() && unnamed_ok) {
    // An unnamed entry: its hint must have been named in a committed transaction (records.h).
    if (hint < hinted_.size() && hinted_[hint].name != nullptr) return hinted_[hint].key;
    return Status::InvalidArgument(std::string(what) + " for an unnamed series with hint " + std::to_string(hint) +
                                   ": no earlier commit of this store named that hint");
  }
  auto it = series_ids_.find(name);
  if (it == series_ids_.end()) {
    return Status::InvalidArgument(std::string(what) + " for series '" + std::string(name) +
                                   "': the series is neither stored nor listed in the batch's series");
  }
  if (hint < kMaxHint) {  // a hint is a dense index, not any number
    if (hint >= hinted_.size()) hinted_.resize(std::max<size_t>(hint + 1, hinted_.size() * 5 / 4));
    hinted_[hint] = Hinted(&it->first, it->second);
  }
  return it->second;
}

Status Store::Impl::WriteBatch(const CommitBatch& batch, Tally& tally) {
  using B = Statement::Bytes;
  tally = Tally{};
  added_names_.clear();
  // Inside the transaction: the names read are committed ones, valid whatever becomes of it.
  PLIMSOLL_RETURN_IF_ERROR(LoadSeriesKeys());
  if (fail_after_rows_ == 0) PLIMSOLL_RETURN_IF_ERROR(CountRow(tally));

  if (!batch.series.empty()) {
    Result<Statement> stmt = db_->Prepare("INSERT INTO series(name, profile, created_ms) VALUES (?1, ?2, ?3)");
    if (!stmt.ok()) return stmt.status();
    for (const SeriesRecord& s : batch.series) {
      if (series_ids_.count(s.name) != 0) continue;
      stmt->Bind(1, s.name, B::kBorrow).Bind(2, s.profile, B::kBorrow).Bind(3, s.created_ms);
      PLIMSOLL_RETURN_IF_ERROR(stmt->Run());
      series_ids_.emplace(s.name, sqlite3_last_insert_rowid(db_->raw()));
      added_names_.push_back(s.name);
      PLIMSOLL_RETURN_IF_ERROR(CountRow(tally));
    }
  }
  if (!batch.models.empty()) {
    Result<Statement> stmt = db_->Prepare(
        "INSERT INTO model(series, spec, period, alpha, beta, gamma, phi, sigma2, loglik, aicc, fitted_ms, reason) "
        "VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12) ON CONFLICT(series) DO UPDATE SET "
        "spec = excluded.spec, period = excluded.period, alpha = excluded.alpha, beta = excluded.beta, "
        "gamma = excluded.gamma, phi = excluded.phi, sigma2 = excluded.sigma2, loglik = excluded.loglik, "
        "aicc = excluded.aicc, fitted_ms = excluded.fitted_ms, reason = excluded.reason");
    if (!stmt.ok()) return stmt.status();
    for (const ModelRecord& m : batch.models) {
      Result<int64_t> id = Resolve(m.series, "model");
      if (!id.ok()) return id.status();
      stmt->Bind(1, *id).Bind(2, m.spec, B::kBorrow).Bind(3, int64_t{m.period}).Bind(4, m.alpha).Bind(5, m.beta);
      stmt->Bind(6, m.gamma).Bind(7, m.phi).Bind(8, m.sigma2).Bind(9, m.loglik).Bind(10, m.aicc);
      stmt->Bind(11, m.fitted_ms).Bind(12, m.reason, B::kBorrow);
      PLIMSOLL_RETURN_IF_ERROR(stmt->Run());
      PLIMSOLL_RETURN_IF_ERROR(CountRow(tally));
    }
  }
  if (!batch.states.empty()) {
    Result<Statement> stmt = db_->Prepare(
        "INSERT INTO state(series, step, time_ms, encoded) VALUES (?1, ?2, ?3, ?4) ON CONFLICT(series) DO UPDATE "
        "SET step = excluded.step, time_ms = excluded.time_ms, encoded = excluded.encoded");
    if (!stmt.ok()) return stmt.status();
    // In key order: the upserts then walk the table's pages once instead of seeking at random
    // (half the CPU of the batch's own order at 100k series). Stable, so a later state still wins.
    keyed_.clear();
    for (size_t i = 0; i < batch.states.size(); ++i) {
      Result<int64_t> id = Resolve(batch.states[i].series, "state", batch.states[i].hint);
      if (!id.ok()) return id.status();
      keyed_.push_back({*id, 0, i});
    }
    std::stable_sort(keyed_.begin(), keyed_.end(), KeyedRow::ByKey);
    for (const KeyedRow& row : keyed_) {
      const StateRecord& st = batch.states[row.index];
      stmt->Bind(1, row.key).Bind(2, st.step).Bind(3, st.time_ms).BindBlob(4, st.encoded, B::kBorrow);
      PLIMSOLL_RETURN_IF_ERROR(stmt->Run());
      ++tally.states;
      PLIMSOLL_RETURN_IF_ERROR(CountRow(tally));
    }
  }
  if (!batch.history.empty()) {
    // The whole interval's observations as one packed row: one B-tree insert instead of one per
    // point. Points go in batch order, a point that continues the previous one (same series, next
    // step) extending its run. Compaction groups runs by series later; grouping here too cost
    // ~190 ns a point at 100k series, mostly cache misses.
    const std::vector<HistoryBatch::Point>& points = batch.history.points;
    const std::vector<std::string>& names = batch.history.series;
    const bool hinted = batch.history.hints.size() == names.size();
    history_keys_.resize(names.size());
    for (size_t k = 0; k < names.size(); ++k) {
      // The hint table is megabytes at 100k series: fetch a later entry while this one resolves.
      if (hinted && k + 8 < names.size() && batch.history.hints[k + 8] < hinted_.size())
        __builtin_prefetch(&hinted_[batch.history.hints[k + 8]]);
      Result<int64_t> id = Resolve(names[k], "history point", hinted ? batch.history.hints[k] : kNoHint, true);
      if (!id.ok()) return id.status();
      history_keys_[k] = *id;
    }
    // At most one run per point: a keyed header and the value.
    const size_t most = points.size() * (kRunHeaderMaxBytes + sizeof(double));
    if (pack_capacity_ < most) {
      // Neither copied nor zeroed (a string's resize did both: a tenth of the writer's time when
      // batches grew), and grown by half again so that growing batches reallocate rarely.
      pack_capacity_ = most + most / 2;
      pack_buffer_ = std::make_unique_for_overwrite<char[]>(pack_capacity_);
    }
    char* out = pack_buffer_.get();
    for (size_t begin = 0; begin < points.size();) {
      const HistoryBatch::Point& head = points[begin];
      if (head.series >= names.size())
        return Status::InvalidArgument("history point names series index " + std::to_string(head.series) + " of " +
                                       std::to_string(names.size()));
      const int64_t key = history_keys_[head.series];
      size_t end = begin + 1;
      while (end < points.size() && points[end].series < names.size() && history_keys_[points[end].series] == key &&
             points[end].step == head.step + static_cast<int64_t>(end - begin))
        ++end;
      out = PutRunHeaderTo(out, key, head.step, end - begin);
      for (size_t i = begin; i < end; ++i, out += sizeof(double)) std::memcpy(out, &points[i].value, sizeof(double));
      begin = end;
    }
    const std::string_view packed(pack_buffer_.get(), static_cast<size_t>(out - pack_buffer_.get()));
    Result<Statement> stmt = db_->Prepare("INSERT INTO history_log(count, points, format) VALUES (?1, ?2, ?3)");
    if (!stmt.ok()) return stmt.status();
    stmt->Bind(1, static_cast<int64_t>(batch.history.size())).BindBlob(2, packed, B::kBorrow);
    stmt->Bind(3, kLogFormatRuns);
    PLIMSOLL_RETURN_IF_ERROR(stmt->Run());
    tally.history = batch.history.size();
    PLIMSOLL_RETURN_IF_ERROR(CountRow(tally));
  }
  if (!batch.flags.empty()) {
    Result<Statement> stmt = db_->Prepare(
        "INSERT OR IGNORE INTO flags(series, step, time_ms, value, expected, lower, upper, level, score, form) "
        "VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10)");
    if (!stmt.ok()) return stmt.status();
    keyed_.clear();
    const bool hinted = batch.flag_hints.size() == batch.flags.size();
    for (size_t i = 0; i < batch.flags.size(); ++i) {
      Result<int64_t> id = Resolve(batch.flags[i].series, "flag", hinted ? batch.flag_hints[i] : kNoHint);
      if (!id.ok()) return id.status();
      keyed_.push_back({*id, batch.flags[i].step, i});
    }
    std::stable_sort(keyed_.begin(), keyed_.end(), KeyedRow::ByStep);  // primary-key order (schema 9)
    for (const KeyedRow& row : keyed_) {
      const FlagRecord& f = batch.flags[row.index];
      stmt->Bind(1, row.key).Bind(2, f.step).Bind(3, f.time_ms).Bind(4, f.value).Bind(5, f.expected);
      stmt->Bind(6, f.lower).Bind(7, f.upper).Bind(8, f.level).Bind(9, f.score).Bind(10, f.form, B::kBorrow);
      PLIMSOLL_RETURN_IF_ERROR(stmt->Run());
      ++(db_->changes() == 0 ? tally.flags_duplicate : tally.flags);
      PLIMSOLL_RETURN_IF_ERROR(CountRow(tally));
    }
  }
  if (!batch.alerts.empty()) {
    Result<Statement> stmt = db_->Prepare(
        "INSERT OR IGNORE INTO alerts(series, step, kind, time_ms, detail) VALUES (?1, ?2, ?3, ?4, ?5)");
    if (!stmt.ok()) return stmt.status();
    for (const AlertRecord& a : batch.alerts) {
      Result<int64_t> id = Resolve(a.series, "alert");
      if (!id.ok()) return id.status();
      stmt->Bind(1, *id).Bind(2, a.step).Bind(3, AlertKindText(a.kind)).Bind(4, a.time_ms);
      stmt->Bind(5, a.detail, B::kBorrow);
      PLIMSOLL_RETURN_IF_ERROR(stmt->Run());
      ++(db_->changes() == 0 ? tally.alerts_duplicate : tally.alerts);
      PLIMSOLL_RETURN_IF_ERROR(CountRow(tally));
    }
  }
  if (!batch.dead_letters.empty()) {
    Result<Statement> stmt = db_->Prepare(
        "INSERT INTO dead_letters(received_ms, stream, partition, source_offset, raw, raw_size, reason, status_code) "
        "VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)");
    if (!stmt.ok()) return stmt.status();
    for (const DeadLetterRecord& d : batch.dead_letters) {
      std::string_view raw(d.raw);
      raw = raw.substr(0, static_cast<size_t>(options_.dead_letter_max_bytes));
      stmt->Bind(1, d.received_ms).Bind(2, d.stream, B::kBorrow).Bind(3, int64_t{d.partition}).Bind(4, d.offset);
      stmt->BindBlob(5, raw, B::kBorrow).Bind(6, static_cast<int64_t>(d.raw.size()));
      stmt->Bind(7, d.reason, B::kBorrow).Bind(8, int64_t{d.status_code});
      PLIMSOLL_RETURN_IF_ERROR(stmt->Run());
      ++tally.dead;
      PLIMSOLL_RETURN_IF_ERROR(CountRow(tally));
    }
  }
  if (!batch.events.empty()) {
    Result<Statement> stmt =
        db_->Prepare("INSERT INTO events(time_ms, series, kind, detail) VALUES (?1, ?2, ?3, ?4)");
    if (!stmt.ok()) return stmt.status();
    for (const EventRecord& e : batch.events) {
      stmt->Bind(1, e.time_ms);
      if (e.series.empty()) {
        stmt->BindNull(2);
      } else {
        Result<int64_t> id = Resolve(e.series, "event");
        if (!id.ok()) return id.status();
        stmt->Bind(2, *id);
      }
      stmt->Bind(3, e.kind, B::kBorrow).Bind(4, e.detail, B::kBorrow);
      PLIMSOLL_RETURN_IF_ERROR(stmt->Run());
      PLIMSOLL_RETURN_IF_ERROR(CountRow(tally));
    }
  }
  if (!batch.positions.empty()) {
    Result<Statement> stmt = db_->Prepare(
        "INSERT INTO source_positions(stream, partition, next_offset) VALUES (?1, ?2, ?3) "
        "ON CONFLICT(stream, partition) DO UPDATE SET next_offset = excluded.next_offset");
    if (!stmt.ok()) return stmt.status();
    for (const PositionRecord& p : batch.positions) {
      stmt->Bind(1, p.stream, B::kBorrow).Bind(2, int64_t{p.partition}).Bind(3, p.next_offset);
      PLIMSOLL_RETURN_IF_ERROR(stmt->Run());
      PLIMSOLL_RETURN_IF_ERROR(CountRow(tally));
    }
  }
  return Status::Ok();
}

Status Store::Impl::Commit(const CommitBatch& batch) {
  if (batch.empty()) return Status::Ok();
  const int64_t start = options_.clock->MonotonicNanos();
  Tally tally;
  Status status = RunTransaction(
      "commit", [&] { return WriteBatch(batch, tally); },
      [&] {
        // Series the transaction created are gone, and so are the hints that resolved to them;
        // hints of committed series stay (a caller may already leave those unnamed).
        int64_t first_added_key = INT64_MAX;
        for (const std::string& name : added_names_) {
          auto it = series_ids_.find(name);
          if (it == series_ids_.end()) continue;
          first_added_key = std::min(first_added_key, it->second);  // new keys exceed every older one
          series_ids_.erase(it);
        }
        if (first_added_key != INT64_MAX)
          for (Hinted& h : hinted_)
            if (h.name != nullptr && h.key >= first_added_key) h = Hinted();
        added_names_.clear();
      });
  if (!status.ok()) {
    ++counters_.commit_failures;
    counters_.last_error = status.code();
    spdlog::warn("store: commit of {} records failed; the caller keeps the batch: {}", batch.size(),
                 status.ToString());
    return status;
  }
  for (const PositionRecord& p : batch.positions) positions_[{p.stream, p.partition}] = p.next_offset;
  log_points_ += static_cast<int64_t>(tally.history);
  const int64_t micros = (options_.clock->MonotonicNanos() - start) / 1000;
  ++counters_.commits;
  counters_.rows_written += static_cast<uint64_t>(tally.rows) - tally.flags_duplicate - tally.alerts_duplicate;
  counters_.states_written += tally.states;
  counters_.history_points += tally.history;
  counters_.flags_written += tally.flags;
  counters_.flags_duplicate += tally.flags_duplicate;
  counters_.alerts_written += tally.alerts;
  counters_.alerts_duplicate += tally.alerts_duplicate;
  counters_.dead_letters += tally.dead;
  counters_.last_commit_micros = micros;
  counters_.max_commit_micros = std::max(counters_.max_commit_micros, micros);
  counters_.log_points = log_points_;
  if (compact_in_commit_ && log_points_ >= options_.history_compact_points) {
    // The batch is already durable; a failed compaction keeps the log and is retried next time.
    Status compacted = CompactHistory(INT64_MAX);
    if (!compacted.ok()) spdlog::warn("store: history compaction failed: {}", compacted.ToString());
  }
  return Status::Ok();
}

Result<PreparedCompaction> Store::Impl::PrepareCompaction(int64_t max_log_rows, PreparedCompaction recycled) {
  // One read transaction: the listed log rows and their blobs come from the same snapshot.
  PLIMSOLL_RETURN_IF_ERROR(db_->Exec("BEGIN"));
  Result<PreparedCompaction> prepared = ReadAndRegroupLog(max_log_rows, std::move(recycled));
  IgnoreError(db_->Exec("COMMIT"));  // a read transaction has nothing to lose; the result is already whole
  return prepared;
}

Result<PreparedCompaction> Store::Impl::ReadAndRegroupLog(int64_t max_log_rows, PreparedCompaction out) {
  out.Clear();
  // The log rows' blobs are read straight into one buffer; their runs (not points: a run spans a
  // series' steps in one commit) are grouped by series with a counting sort over the series keys,
  // which keeps each series' runs in log order, so a later value for a step still wins on read.
  struct LogRow {
    int64_t seq, format;
    size_t bytes;
  };
  std::vector<LogRow> log_rows;
  size_t total_bytes = 0;
  {
    // length() of a blob comes from the record header: the blobs are not read here.
    Result<Statement> rows =
        db_->Prepare("SELECT seq, format, length(points) FROM history_log ORDER BY seq LIMIT ?1");
    if (!rows.ok()) return rows.status();
    rows->Bind(1, max_log_rows);
    PLIMSOLL_RETURN_IF_ERROR(ForEachRow(*rows, [&](const Statement& row) {
      log_rows.push_back({row.Int(0), row.Int(1), static_cast<size_t>(row.Int(2))});
      total_bytes += log_rows.back().bytes;
      return Status::Ok();
    }));
  }
  if (log_rows.empty()) return out;
  Result<int64_t> max_key = db_->QueryInt("SELECT coalesce(max(id), 0) FROM series");
  if (!max_key.ok()) return max_key.status();
  const auto keys = static_cast<size_t>(*max_key) + 1;
  out.first_log_seq = log_rows.front().seq;
  out.last_log_seq = log_rows.back().seq;
  out.log_rows = static_cast<int64_t>(log_rows.size());
  if (log_copy_.size() < total_bytes) log_copy_.resize(total_bytes);
  // Calls visit(series, first_step, values, count) for every run of the copied log, in log order.
  auto for_each_run = [&](auto visit) -> Status {
    size_t at = 0;
    for (const LogRow& row : log_rows) {
      int64_t unknown = -1;
      PLIMSOLL_RETURN_IF_ERROR(ForEachLogRun(row.seq, row.format, std::string_view(log_copy_.data() + at, row.bytes),
                                             [&](int64_t series, int64_t first, const char* values, size_t count) {
                                               if (series < 0 || static_cast<size_t>(series) >= keys) {
                                                 unknown = series;
                                               } else if (unknown < 0) {
                                                 visit(static_cast<size_t>(series), first, values, count);
                                               }
                                             }));
      if (unknown >= 0)
        return Status::Corruption("history_log row " + std::to_string(row.seq) + " names series key " +
                                  std::to_string(unknown) + ", which is not in the series table");
      at += row.bytes;
    }
    return Status::Ok();
  };
  size_t at = 0;
  for (const LogRow& row : log_rows) {
    PLIMSOLL_RETURN_IF_ERROR(db_->ReadBlob("history_log", "points", row.seq, {log_copy_.data() + at, row.bytes}));
    at += row.bytes;
  }
  series_run_starts_.assign(keys + 1, 0);
  PLIMSOLL_RETURN_IF_ERROR(for_each_run([&](size_t series, int64_t, const char*, size_t count) {
    ++series_run_starts_[series + 1];
    out.points += static_cast<int64_t>(count);
  }));
  for (size_t k = 1; k <= keys; ++k) series_run_starts_[k] += series_run_starts_[k - 1];
  series_run_cursor_.assign(series_run_starts_.begin(), series_run_starts_.end() - 1);
  sorted_runs_.resize(series_run_starts_[keys]);
  PLIMSOLL_RETURN_IF_ERROR(for_each_run([&](size_t series, int64_t first, const char* values, size_t count) {
    sorted_runs_[series_run_cursor_[series]++] = {first, static_cast<uint64_t>(values - log_copy_.data()), count};
  }));
  out.bytes.reserve(total_bytes);  // values move over one for one; run headers shrink or stay
  PackWriter writer(out, static_cast<size_t>(options_.history_chunk_points));
  for (size_t key = 0; key < keys; ++key) {
    const size_t begin = series_run_starts_[key], end = series_run_starts_[key + 1];
    if (begin != end)
      writer.AddSeries(static_cast<int64_t>(key), std::span<const SortedRun>(sorted_runs_).subspan(begin, end - begin),
                       log_copy_.data());
  }
  writer.Finish();
  return out;
}

Status Store::Impl::ApplyCompaction(const PreparedCompaction& prepared, int64_t started_ns) {
  if (options_.read_only) return Status::Unavailable("store '" + db_->path() + "' is open read-only");
  if (prepared.empty()) return Status::Ok();
  const int64_t seq_before = next_history_seq_;
  Status status = RunTransaction(
      "history compaction",
      [&]() -> Status {
        next_history_seq_ = seq_before;
        {
          // The prepared rows must still be the oldest log rows, all of them: a generation must
          // not hold points older than a row left in the log (a later seq wins on read).
          Result<Statement> check = db_->Prepare(
              "SELECT count(*), coalesce(sum(count), 0), coalesce(min(seq), -1) FROM history_log WHERE seq <= ?1");
          if (!check.ok()) return check.status();
          check->Bind(1, prepared.last_log_seq);
          Result<bool> row = check->Step();
          if (!row.ok()) return row.status();
          if (check->Int(0) != prepared.log_rows || check->Int(1) != prepared.points ||
              check->Int(2) != prepared.first_log_seq) {
            return Status::Aborted("prepared compaction of history_log rows " + std::to_string(prepared.first_log_seq) +
                                   ".." + std::to_string(prepared.last_log_seq) +
                                   " is stale: those are no longer the oldest log rows");
          }
        }
        // A new generation: its rows take the next seqs (the rowid) and the highest gen, so the
        // inserts append to the table and to its index instead of touching older pages.
        Result<int64_t> gen = db_->QueryInt("SELECT coalesce(max(gen), 0) + 1 FROM history_generations");
        if (!gen.ok()) return gen.status();
        Result<Statement> insert = db_->Prepare(
            "INSERT INTO history(seq, gen, first_series, last_series, min_step, max_step, count, format, directory, "
            "points) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10)");
        if (!insert.ok()) return insert.status();
        for (const PreparedCompaction::Row& r : prepared.rows) {
          insert->Bind(1, next_history_seq_++).Bind(2, *gen).Bind(3, r.first_series).Bind(4, r.last_series);
          insert->Bind(5, r.min_step).Bind(6, r.max_step).Bind(7, r.count).Bind(8, kHistoryFormatPack);
          insert->BindBlob(9, std::string_view(prepared.directories.data() + r.directory_offset, r.directory_bytes),
                           Statement::Bytes::kBorrow);
          insert->BindBlob(10, std::string_view(prepared.bytes.data() + r.offset, r.bytes), Statement::Bytes::kBorrow);
          PLIMSOLL_RETURN_IF_ERROR(insert->Run());
        }
        Result<Statement> generation =
            db_->Prepare("INSERT INTO history_generations(gen, points, compacted_ms) VALUES (?1, ?2, ?3)");
        if (!generation.ok()) return generation.status();
        PLIMSOLL_RETURN_IF_ERROR(
            generation->Bind(1, *gen).Bind(2, prepared.points).Bind(3, options_.clock->WallMillis()).Run());
        Result<Statement> seq = db_->Prepare("UPDATE history_seq SET next_seq = ?1");
        if (!seq.ok()) return seq.status();
        PLIMSOLL_RETURN_IF_ERROR(seq->Bind(1, next_history_seq_).Run());
        Result<Statement> erase = db_->Prepare("DELETE FROM history_log WHERE seq <= ?1");
        if (!erase.ok()) return erase.status();
        erase->Bind(1, prepared.last_log_seq);
        return erase->Run();
      },
      [&] { next_history_seq_ = seq_before; });
  if (!status.ok()) {
    ++counters_.compaction_failures;
    counters_.last_error = status.code();
    return status;
  }
  log_points_ = std::max<int64_t>(0, log_points_ - prepared.points);
  counters_.log_points = log_points_;
  ++counters_.compactions;
  const int64_t micros = (options_.clock->MonotonicNanos() - started_ns) / 1000;
  counters_.compaction_micros += micros;
  counters_.max_compaction_micros = std::max(counters_.max_compaction_micros, micros);
  return Status::Ok();
}

Status Store::Impl::CompactHistory(int64_t max_log_rows) {
  if (options_.read_only) return Status::Unavailable("store '" + db_->path() + "' is open read-only");
  const int64_t start = options_.clock->MonotonicNanos();
  Result<PreparedCompaction> prepared = PrepareCompaction(max_log_rows, {});
  if (!prepared.ok()) {
    ++counters_.compaction_failures;
    counters_.last_error = prepared.status().code();
    return prepared.status().WithContext("history compaction in '" + db_->path() + "'");
  }
  return ApplyCompaction(*prepared, start);  // timed from the start: here the writer prepared it too
}

int Store::Impl::OnWalCommit(void* self, sqlite3* /*db*/, const char* /*schema*/, int frames) {
  auto* impl = static_cast<Impl*>(self);
  impl->counters_.wal_frames = frames;
  const int limit = impl->options_.wal_autocheckpoint_pages;
  // Passive, as SQLite's own: a checkpoint that fails or cannot finish only leaves the WAL longer.
  if (impl->checkpoint_in_commit_ && limit > 0 && frames >= limit) IgnoreError(impl->CheckpointWal());
  return SQLITE_OK;
}

Status Store::Impl::CheckpointWal() {
  if (options_.read_only) return Status::Unavailable("store '" + db_->path() + "' is open read-only");
  const int64_t start = options_.clock->MonotonicNanos();
  const int rc = sqlite3_wal_checkpoint_v2(db_->raw(), "main", SQLITE_CHECKPOINT_PASSIVE, nullptr, nullptr);
  if ((rc & 0xFF) == SQLITE_BUSY) return Status::Ok();  // another connection is checkpointing: it copies them
  if (rc != SQLITE_OK) return SqliteStatus(rc, "checkpointing the WAL of '" + db_->path() + "'", db_->raw());
  ++counters_.wal_checkpoints;
  counters_.wal_checkpoint_micros += (options_.clock->MonotonicNanos() - start) / 1000;
  return Status::Ok();
}

Result<int64_t> Store::Impl::LookupSeries(std::string_view name) {
  // Readers may be separate connections whose in-memory map is stale, so ask the file.
  Result<Statement> stmt = db_->Prepare("SELECT id FROM series WHERE name = ?1");
  if (!stmt.ok()) return stmt.status();
  stmt->Bind(1, name);
  Result<bool> row = stmt->Step();
  if (!row.ok()) return row.status();
  if (!*row) return Status::NotFound("series '" + std::string(name) + "' is not in the store");
  return stmt->Int(0);
}

Status Store::Impl::ForEachSeries(const std::function<Status(const StoredSeries&)>& visit) {
  Result<Statement> stmt = db_->Prepare(std::string(kSeriesSelect) + "ORDER BY s.id");
  if (!stmt.ok()) return stmt.status();
  return ForEachRow(*stmt, [&](const Statement& row) { return visit(ReadSeriesRow(row, true)); });
}

Result<StoredSeries> Store::Impl::GetSeries(std::string_view name) {
  Result<Statement> stmt = db_->Prepare(std::string(kSeriesSelect) + "WHERE s.name = ?1");
  if (!stmt.ok()) return stmt.status();
  stmt->Bind(1, name);
  Result<bool> row = stmt->Step();
  if (!row.ok()) return row.status();
  if (!*row) return Status::NotFound("series '" + std::string(name) + "' is not in the store");
  return ReadSeriesRow(*stmt, true);
}

Result<std::vector<StoredSeries>> Store::Impl::ListSeries(size_t limit, std::string_view after_name) {
  Result<Statement> stmt = db_->Prepare(std::string(kSeriesSelect) + "WHERE s.name > ?1 ORDER BY s.name LIMIT ?2");
  if (!stmt.ok()) return stmt.status();
  stmt->Bind(1, after_name).Bind(2, static_cast<int64_t>(std::min<size_t>(limit, INT64_MAX)));
  std::vector<StoredSeries> out;
  PLIMSOLL_RETURN_IF_ERROR(ForEachRow(*stmt, [&](const Statement& row) {
    out.push_back(ReadSeriesRow(row, false));
    return Status::Ok();
  }));
  return out;
}

Result<std::vector<FlagRecord>> Store::Impl::RecentFlags(std::string_view series, size_t limit) {
  constexpr const char* kSelect =
      "SELECT s.name, f.step, f.time_ms, f.value, f.expected, f.lower, f.upper, f.level, f.score, f.form "
      "FROM flags f JOIN series s ON s.id = f.series ";
  int64_t id = -1;
  if (!series.empty()) {
    Result<int64_t> found = LookupSeries(series);
    if (!found.ok()) return found.status();
    id = *found;
  }
  Result<Statement> stmt = db_->Prepare(std::string(kSelect) + (series.empty()
                                                                    ? "ORDER BY f.time_ms DESC, f.series LIMIT ?1"
                                                                    : "WHERE f.series = ?2 ORDER BY f.step DESC LIMIT ?1"));
  if (!stmt.ok()) return stmt.status();
  stmt->Bind(1, static_cast<int64_t>(std::min<size_t>(limit, INT64_MAX)));
  if (!series.empty()) stmt->Bind(2, id);
  std::vector<FlagRecord> out;
  PLIMSOLL_RETURN_IF_ERROR(ForEachRow(*stmt, [&](const Statement& row) {
    out.push_back(FlagRecord{row.Text(0), row.Int(1), row.Int(2), RealOrNaN(row, 3), RealOrNaN(row, 4),
                             RealOrNaN(row, 5), RealOrNaN(row, 6), RealOrNaN(row, 7), RealOrNaN(row, 8),
                             row.Text(9)});
    return Status::Ok();
  }));
  return out;
}

Result<std::vector<AlertRecord>> Store::Impl::RecentAlerts(std::string_view series, size_t limit) {
  constexpr const char* kSelect =
      "SELECT s.name, a.step, a.time_ms, a.kind, a.detail FROM alerts a JOIN series s ON s.id = a.series ";
  int64_t id = -1;
  if (!series.empty()) {
    Result<int64_t> found = LookupSeries(series);
    if (!found.ok()) return found.status();
    id = *found;
  }
  Result<Statement> stmt = db_->Prepare(
      std::string(kSelect) + (series.empty() ? "ORDER BY a.time_ms DESC, a.series LIMIT ?1"
                                             : "WHERE a.series = ?2 ORDER BY a.step DESC, a.kind LIMIT ?1"));
  if (!stmt.ok()) return stmt.status();
  stmt->Bind(1, static_cast<int64_t>(std::min<size_t>(limit, INT64_MAX)));
  if (!series.empty()) stmt->Bind(2, id);
  std::vector<AlertRecord> out;
  PLIMSOLL_RETURN_IF_ERROR(ForEachRow(*stmt, [&](const Statement& row) {
    AlertKind kind = row.Text(3) == "raised" ? AlertKind::kRaised : AlertKind::kCleared;
    out.push_back(AlertRecord{row.Text(0), row.Int(1), row.Int(2), kind, row.Text(4)});
    return Status::Ok();
  }));
  return out;
}

Result<std::vector<EventRecord>> Store::Impl::RecentEvents(std::string_view series, size_t limit) {
  constexpr const char* kSelect =
      "SELECT e.time_ms, coalesce(s.name, ''), e.kind, e.detail FROM events e LEFT JOIN series s ON s.id = e.series ";
  int64_t id = -1;
  if (!series.empty()) {
    Result<int64_t> found = LookupSeries(series);
    if (!found.ok()) return found.status();
    id = *found;
  }
  Result<Statement> stmt = db_->Prepare(std::string(kSelect) + (series.empty() ? "ORDER BY e.id DESC LIMIT ?1"
                                                                               : "WHERE e.series = ?2 ORDER BY e.id DESC LIMIT ?1"));
  if (!stmt.ok()) return stmt.status();
  stmt->Bind(1, static_cast<int64_t>(std::min<size_t>(limit, INT64_MAX)));
  if (!series.empty()) stmt->Bind(2, id);
  std::vector<EventRecord> out;
  PLIMSOLL_RETURN_IF_ERROR(ForEachRow(*stmt, [&](const Statement& row) {
    out.push_back(EventRecord{row.Int(0), row.Text(1), row.Text(2), row.Text(3)});
    return Status::Ok();
  }));
  return out;
}

Result<std::vector<StoredDeadLetter>> Store::Impl::RecentDeadLetters(size_t limit) {
  Result<Statement> stmt = db_->Prepare(
      "SELECT id, raw_size, received_ms, stream, partition, source_offset, raw, reason, status_code "
      "FROM dead_letters ORDER BY id DESC LIMIT ?1");
  if (!stmt.ok()) return stmt.status();
  stmt->Bind(1, static_cast<int64_t>(std::min<size_t>(limit, INT64_MAX)));
  std::vector<StoredDeadLetter> out;
  PLIMSOLL_RETURN_IF_ERROR(ForEachRow(*stmt, [&](const Statement& row) {
    DeadLetterRecord d{row.Int(2), row.Text(3), static_cast<int32_t>(row.Int(4)), row.Int(5),
                       row.Blob(6), row.Text(7), static_cast<int32_t>(row.Int(8))};
    out.push_back(StoredDeadLetter{row.Int(0), row.Int(1), std::move(d)});
    return Status::Ok();
  }));
  return out;
}

Status Store::Impl::AddRefitRequest(std::string_view pattern, std::string_view reason, int64_t requested_ms) {
  if (options_.read_only) return Status::Unavailable("store '" + db_->path() + "' is open read-only");
  return RunTransaction(
      "adding a refit request",
      [&]() -> Status {
        Result<Statement> insert =
            db_->Prepare("INSERT INTO refit_requests (pattern, reason, requested_ms) VALUES (?1, ?2, ?3)");
        if (!insert.ok()) return insert.status();
        return insert->Bind(1, pattern).Bind(2, reason).Bind(3, requested_ms).Run();
      },
      [] {});
}

Result<std::vector<RefitRequestRecord>> Store::Impl::TakeRefitRequests() {
  if (options_.read_only) return Status::Unavailable("store '" + db_->path() + "' is open read-only");
  // Polled about once a second by a running daemon: look before taking the write lock.
  Result<int64_t> pending = db_->QueryInt("SELECT EXISTS (SELECT 1 FROM refit_requests)");
  if (!pending.ok()) return pending.status();
  std::vector<RefitRequestRecord> out;
  if (*pending == 0) return out;
  Status status = RunTransaction(
      "taking refit requests",
      [&]() -> Status {
        out.clear();
        Result<Statement> rows =
            db_->Prepare("SELECT id, pattern, reason, requested_ms FROM refit_requests ORDER BY id");
        if (!rows.ok()) return rows.status();
        PLIMSOLL_RETURN_IF_ERROR(ForEachRow(*rows, [&](const Statement& row) {
          out.push_back(RefitRequestRecord{row.Int(0), row.Text(1), row.Text(2), row.Int(3)});
          return Status::Ok();
        }));
        if (out.empty()) return Status::Ok();
        Result<Statement> remove = db_->Prepare("DELETE FROM refit_requests WHERE id <= ?1");
        if (!remove.ok()) return remove.status();
        return remove->Bind(1, out.back().id).Run();
      },
      [] {});
  if (!status.ok()) return status;
  return out;
}

Status Store::Impl::SetSeriesProfile(std::string_view series, std::string_view profile) {
  if (options_.read_only) return Status::Unavailable("store '" + db_->path() + "' is open read-only");
  Result<int64_t> id = LookupSeries(series);
  if (!id.ok()) return id.status();
  return RunTransaction(
      "updating the profile of a series",
      [&]() -> Status {
        Result<Statement> update = db_->Prepare("UPDATE series SET profile = ?1 WHERE id = ?2");
        if (!update.ok()) return update.status();
        return update->Bind(1, profile).Bind(2, *id).Run();
      },
      [] {});
}

Result<HistorySlice> Store::Impl::HistoryTail(std::string_view series, size_t n, int64_t through_step) {
  Result<int64_t> id = LookupSeries(series);
  if (!id.ok()) return id.status();
  HistorySlice slice;
  if (n == 0) return slice;
  // Points not yet compacted, in commit order (a later point for the same step wins).
  std::vector<std::pair<int64_t, double>> logged;
  {
    Result<Statement> rows = db_->Prepare("SELECT seq, format, points FROM history_log ORDER BY seq");
    if (!rows.ok()) return rows.status();
    PLIMSOLL_RETURN_IF_ERROR(ForEachRow(*rows, [&](const Statement& row) {
      return ForEachLogRun(row.Int(0), row.Int(1), row.BlobView(2),
                           [&](int64_t key, int64_t first, const char* values, size_t count) {
                             if (key != *id) return;
                             for (size_t i = 0; i < count && first + static_cast<int64_t>(i) <= through_step; ++i)
                               logged.emplace_back(first + static_cast<int64_t>(i), ValueAt(values, i));
                           });
    }));
  }
  // Compacted rows, one probe per generation (index gen, last_series): a generation's rows are in
  // series order, so the rows holding the series are the first ones whose last series is not
  // before it, as long as their first series is not after it. Older single-series rows (formats
  // 1 and 2) are read whole; a packed row only in the series' segment its directory names.
  struct Range {
    int64_t seq, format, min_step, max_step;
    size_t offset, bytes;  // the series' part of the row's points
  };
  std::vector<Range> stored;
  {
    Result<Statement> gens = db_->Prepare("SELECT gen FROM history_generations ORDER BY gen");
    if (!gens.ok()) return gens.status();
    Result<Statement> rows = db_->Prepare(
        "SELECT seq, first_series, format, min_step, max_step, directory, length(points) FROM history "
        "WHERE gen = ?1 AND last_series >= ?2 ORDER BY last_series, seq");
    if (!rows.ok()) return rows.status();
    PLIMSOLL_RETURN_IF_ERROR(ForEachRow(*gens, [&](const Statement& gen) {
      rows->Bind(1, gen.Int(0)).Bind(2, *id);
      Status status;
      for (;;) {
        Result<bool> more = rows->Step();
        if (!more.ok() || !*more || rows->Int(1) > *id) {
          if (!more.ok()) status = more.status();
          break;
        }
        const int64_t seq = rows->Int(0), format = rows->Int(2);
        const auto bytes = static_cast<size_t>(rows->Int(6));
        if (format != kHistoryFormatPack) {
          stored.push_back({seq, format, rows->Int(3), rows->Int(4), 0, bytes});
          continue;
        }
        Result<std::optional<PackEntry>> entry = FindPackEntry(seq, rows->BlobView(5), bytes, *id);
        if (!entry.ok()) {
          status = entry.status();
          break;
        }
        if (*entry) {
          const PackEntry& e = **entry;
          stored.push_back({seq, kLogFormatRuns, e.min_step, e.max_step, e.offset, e.bytes});
        }
      }
      rows->Reset();
      return status;
    }));
  }
  std::string part;
  // Calls visit(step, value) for every point of the series in one row.
  auto read_row = [&](const Range& r, auto visit) -> Status {
    part.resize(r.bytes);
    PLIMSOLL_RETURN_IF_ERROR(db_->ReadBlobPart("history", "points", r.seq, static_cast<int64_t>(r.offset),
                                               {part.data(), part.size()}));
    return ForEachHistoryRun(*id, r.seq, r.format, r.min_step, part,
                             [&](int64_t first, const char* values, size_t count) {
                               for (size_t i = 0; i < count; ++i)
                                 visit(first + static_cast<int64_t>(i), ValueAt(values, i));
                             });
  };
  // The newest stored step no later than through_step: the largest max_step up to it (a row's
  // max_step is a stored point), or a point inside a row that reaches past it.
  int64_t last = INT64_MIN, earliest = INT64_MAX;
  for (const auto& point : logged) last = std::max(last, point.first), earliest = std::min(earliest, point.first);
  for (const Range& r : stored) {
    if (r.max_step <= through_step) {
      last = std::max(last, r.max_step);
    } else if (r.min_step <= through_step) {
      PLIMSOLL_RETURN_IF_ERROR(read_row(r, [&](int64_t step, double) {
        if (step <= through_step) last = std::max(last, step);
      }));
    }
  }
  if (last == INT64_MIN) return slice;  // no history at all
  const int64_t window_start = last - static_cast<int64_t>(n) + 1;
  std::vector<Range> window;
  for (const Range& r : stored) {
    // Rows wholly before the window only tell whether the series' history starts before it.
    if (r.max_step < window_start) earliest = std::min(earliest, window_start);
    if (r.max_step >= window_start && r.min_step <= last) {
      window.push_back(r);
      earliest = std::min(earliest, r.min_step);
    }
  }
  const int64_t start = std::max(window_start, earliest);
  slice.first_step = start;
  slice.values.assign(static_cast<size_t>(last - start + 1), kNoValue);
  auto place = [&](int64_t step, double value) {
    if (step >= start && step <= last) slice.values[static_cast<size_t>(step - start)] = value;
  };
  std::sort(window.begin(), window.end(), [](const Range& a, const Range& b) { return a.seq < b.seq; });
  for (const Range& r : window) PLIMSOLL_RETURN_IF_ERROR(read_row(r, place));  // a later row wins
  for (const auto& [step, value] : logged) place(step, value);
  return slice;
}

std::optional<int64_t> Store::Impl::StoredPosition(std::string_view stream, int32_t partition) const {
  auto it = positions_.find(std::pair<std::string, int32_t>(stream, partition));
  if (it == positions_.end()) return std::nullopt;
  return it->second;
}

std::vector<PositionRecord> Store::Impl::Positions() const {
  std::vector<PositionRecord> out;
  for (const auto& [key, offset] : positions_) out.push_back(PositionRecord{key.first, key.second, offset});
  return out;
}

Result<std::unique_ptr<Store>> Store::Open(StoreOptions options) {
  if (options.path.empty()) return Status::InvalidArgument("store path is empty");
  if (options.clock == nullptr) return Status::InvalidArgument("store clock is null");
  options.busy_timeout_ms = Clamp(options.busy_timeout_ms, 0, 60'000);
  options.busy_retries = Clamp(options.busy_retries, 0, 100);
  options.backoff_initial_ms = Clamp(options.backoff_initial_ms, 0, 60'000);
  options.backoff_max_ms = Clamp(options.backoff_max_ms, options.backoff_initial_ms, 600'000);
  options.dead_letter_max_bytes = Clamp(options.dead_letter_max_bytes, 16, 1 << 20);
  options.history_chunk_points = Clamp(options.history_chunk_points, 16, 65'536);
  options.history_compact_points = std::max<int64_t>(options.history_compact_points, 1000);
  if (options.page_bytes < 512 || options.page_bytes > 65'536 ||
      !std::has_single_bit(static_cast<unsigned>(options.page_bytes)))
    return Status::InvalidArgument("store page_bytes " + std::to_string(options.page_bytes) +
                                   " is not a power of two from 512 to 65536");
  options.cache_kib = Clamp(options.cache_kib, 64, 16 * 1024 * 1024);
  options.wal_autocheckpoint_pages = Clamp(options.wal_autocheckpoint_pages, 0, 1 << 24);

  const int flags = options.read_only ? SQLITE_OPEN_READONLY : (SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE);
  Result<std::unique_ptr<SqliteDb>> db = SqliteDb::Open(options.path, flags);
  if (!db.ok()) return db.status();
  SqliteDb& conn = **db;
  if (!options.read_only && sqlite3_db_readonly(conn.raw(), "main") == 1) {
    return Status::Unavailable("store file '" + options.path +
                               "' cannot be written (permissions or a read-only file system); "
                               "open it read-only to inspect it");
  }
  sqlite3_busy_timeout(conn.raw(), options.busy_timeout_ms);
  std::string pragmas = "PRAGMA cache_size = -" + std::to_string(options.cache_kib) + "; PRAGMA temp_store = MEMORY;";
  if (!options.read_only) {
    // Before journal_mode: a WAL file fixes the page size. A no-op on a file that has tables.
    pragmas = "PRAGMA page_size = " + std::to_string(options.page_bytes) + "; " + pragmas;
    pragmas += " PRAGMA journal_mode = WAL; PRAGMA synchronous = " + std::string(SynchronousName(options.synchronous)) +
               ";";
  }
  Status status = conn.Exec(pragmas);
  if (!status.ok()) return status.WithContext("configuring store '" + options.path + "'");
  if (!options.read_only) {
    Result<Statement> mode = conn.Prepare("PRAGMA journal_mode");
    if (!mode.ok()) return mode.status();
    Result<bool> row = mode->Step();
    if (!row.ok()) return row.status();
    if (!*row || mode->Text(0) != "wal") {
      return Status::Unavailable("store '" + options.path + "' could not switch to WAL mode (journal_mode " +
                                 (*row ? mode->Text(0) : std::string("unknown")) + ")");
    }
  }
  status = options.read_only ? CheckSchema(conn) : MigrateSchema(conn, LatestSchemaVersion());
  if (!status.ok()) return status;
  auto impl = std::make_unique<Impl>(std::move(options), std::move(*db));
  if (!impl->options_.read_only) sqlite3_wal_hook(conn.raw(), &Impl::OnWalCommit, impl.get());
  PLIMSOLL_RETURN_IF_ERROR(impl->Load());
  return std::unique_ptr<Store>(new Store(std::move(impl)));
}

Store::Store(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
Store::~Store() = default;

Status Store::Commit(const CommitBatch& batch) { return impl_->Commit(batch); }
Status Store::CompactHistory(int64_t max_log_rows) { return impl_->CompactHistory(max_log_rows); }
Result<PreparedCompaction> Store::PrepareCompaction(int64_t max_log_rows, PreparedCompaction recycled) {
  return impl_->PrepareCompaction(max_log_rows, std::move(recycled));
}
Status Store::ApplyCompaction(const PreparedCompaction& prepared) {
  return impl_->ApplyCompaction(prepared, impl_->options_.clock->MonotonicNanos());
}
void Store::SetCompactInCommit(bool on) { impl_->compact_in_commit_ = on; }
Status Store::CheckpointWal() { return impl_->CheckpointWal(); }
void Store::SetCheckpointInCommit(bool on) { impl_->checkpoint_in_commit_ = on; }
Status Store::ForEachSeries(const std::function<Status(const StoredSeries&)>& visit) {
  return impl_->ForEachSeries(visit);
}
Result<StoredSeries> Store::GetSeries(std::string_view name) { return impl_->GetSeries(name); }
Result<std::vector<StoredSeries>> Store::ListSeries(size_t limit, std::string_view after_name) {
  return impl_->ListSeries(limit, after_name);
}
Result<std::vector<FlagRecord>> Store::RecentFlags(std::string_view series, size_t limit) {
  return impl_->RecentFlags(series, limit);
}
Result<std::vector<AlertRecord>> Store::RecentAlerts(std::string_view series, size_t limit) {
  return impl_->RecentAlerts(series, limit);
}
Result<std::vector<EventRecord>> Store::RecentEvents(std::string_view series, size_t limit) {
  return impl_->RecentEvents(series, limit);
}
Result<std::vector<StoredDeadLetter>> Store::RecentDeadLetters(size_t limit) {
  return impl_->RecentDeadLetters(limit);
}
Result<HistorySlice> Store::HistoryTail(std::string_view series, size_t n, int64_t through_step) {
  return impl_->HistoryTail(series, n, through_step);
}
Status Store::AddRefitRequest(std::string_view pattern, std::string_view reason, int64_t requested_ms) {
  return impl_->AddRefitRequest(pattern, reason, requested_ms);
}
Result<std::vector<RefitRequestRecord>> Store::TakeRefitRequests() { return impl_->TakeRefitRequests(); }
Status Store::SetSeriesProfile(std::string_view series, std::string_view profile) {
  return impl_->SetSeriesProfile(series, profile);
}
std::optional<int64_t> Store::StoredPosition(std::string_view stream, int32_t partition) const {
  return impl_->StoredPosition(stream, partition);
}
std::vector<PositionRecord> Store::Positions() const { return impl_->Positions(); }
const StoreCounters& Store::counters() const { return impl_->counters_; }
const StoreOptions& Store::options() const { return impl_->options_; }

void Store::TEST_FailNextCommitAfterRows(int64_t rows, Status status) {
  impl_->fail_after_rows_ = rows;
  impl_->fail_status_ = std::move(status);
}

Status Store::TEST_LimitPages(int64_t pages) {
  // SQLite never shrinks the cap below the current size; a huge value lifts it.
  return impl_->db_->Exec("PRAGMA max_page_count = " + std::to_string(pages > 0 ? pages : 0xFFFFFFFE));
}

}  // namespace plimsoll::store
