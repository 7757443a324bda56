#pragma once
// Rows the store writes and reads, and the CommitBatch that carries one group commit.
//
// The store never interprets model states: they arrive as opaque encoded bytes and come back
// bit-identical. Series are named by their string id; the store maps names to integer keys.
// Times are milliseconds since the Unix epoch; steps are the series' interval-grid index.
//
// Thread-safety: plain value types.

#include <cstdint>
#include <limits>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace plimsoll::store {

inline constexpr double kNoValue = std::numeric_limits<double>::quiet_NaN();  // stored as NULL

// A caller's dense number for a series name (the engine's series index), carried next to the
// name in the hottest records so the store can skip the name lookup. Optional: a hint the store
// has not seen, or one that now names another series, only costs the lookup (the store compares
// the names). kNoHint: none. Hints from kMaxHint up are not remembered (they only cost the lookup).
inline constexpr uint32_t kNoHint = UINT32_MAX;
inline constexpr uint32_t kMaxHint = uint32_t{1} << 26;
// A history entry may go unnamed (an empty name) when its hint was named in an earlier
// successful commit of the same Store object: the store then takes the series that commit
// resolved it to, and the caller copies no name (see HistoryBatch).

// One series' identity. Committed rows may only name series that exist in the store or appear
// in the same batch's `series` list.
struct SeriesRecord {
  std::string name;     // the series id as it arrives in records
  std::string profile;  // the [[profile]] that matched it
  int64_t created_ms = 0;
};

// The model in force for a series (one row per series; changes are also logged as events).
// Parameters the form lacks (beta without trend, gamma without season, phi undamped) are NaN.
struct ModelRecord {
  std::string series;
  std::string spec;  // published taxonomy, e.g. "ETS(M,Ad,M)"
  int32_t period = 1;
  double alpha = kNoValue, beta = kNoValue, gamma = kNoValue, phi = kNoValue;
  double sigma2 = kNoValue;  // innovation variance
  double loglik = kNoValue;
  double aicc = kNoValue;
  int64_t fitted_ms = 0;
  std::string reason;  // why this model was chosen now: "warmup", "refit", "reseed", ...
  // For outputs of a commit (Kafka model_change events); the model table keeps neither, the
  // events table keeps every change. Read back as 0 and "".
  int64_t step = 0;           // the series' step when the model was put in force
  std::string previous_spec;  // the form it replaced; "" for a first model
  friend bool operator==(const ModelRecord&, const ModelRecord&) = default;
};

// A checkpoint of one series' state after `step`.
struct StateRecord {
  std::string series;
  int64_t step = 0;
  int64_t time_ms = 0;
  std::string encoded;  // opaque bytes from the model module, returned bit-identical
  uint32_t hint = kNoHint;  // see kNoHint
};

// The accepted observations of one commit, appended to the series' history (what refits read).
// Each series is named once and its points refer to it by index, so a commit of N points for
// K series costs K name lookups in the store, not N. With hints, an entry's name may be empty
// once a successful commit of this Store named its hint (kMaxHint): a commit naming an
// unknown hint that way fails with InvalidArgument and writes nothing.
struct HistoryBatch {
  struct Point {
    uint32_t series = 0;  // index into `series`
    int64_t step = 0;
    double value = 0;     // NaN: gap step
  };
  std::vector<std::string> series;
  std::vector<uint32_t> hints;  // empty, or one per entry of `series` (see kNoHint)
  std::vector<Point> points;

  // Appends one point; a name equal to the previous point's is not stored again (other repeats
  // only cost a lookup).
  void Add(std::string_view name, int64_t step, double value) {
    if (series.empty() || series.back() != name) series.emplace_back(name);
    points.push_back({static_cast<uint32_t>(series.size() - 1), step, value});
  }
  size_t size() const { return points.size(); }
  bool empty() const { return points.empty(); }
  void clear() { series.clear(), hints.clear(), points.clear(); }
};

// An observation outside its one-step interval. Its id is (series, step): re-committing the
// same flag after a crash is ignored.
struct FlagRecord {
  std::string series;
  int64_t step = 0;
  int64_t time_ms = 0;
  double value = 0, expected = 0, lower = 0, upper = 0;
  double level = 0;  // two-sided band level, e.g. 0.99
  double score = 0;  // standardised innovation
  std::string form;  // model spec that produced the band
  friend bool operator==(const FlagRecord&, const FlagRecord&) = default;
};

// Never renumber: stored as text ("raised"/"cleared"), and the enum order is part of the API.
enum class AlertKind : int { kRaised = 0, kCleared = 1 };

// One alert transition. Its id is (series, step, kind); duplicates are ignored.
struct AlertRecord {
  std::string series;
  int64_t step = 0;
  int64_t time_ms = 0;
  AlertKind kind = AlertKind::kRaised;
  std::string detail;  // JSON object text, free-form
  friend bool operator==(const AlertRecord&, const AlertRecord&) = default;
};

// A record the engine could not accept. `raw` is truncated to StoreOptions::dead_letter_max_bytes.
struct DeadLetterRecord {
  int64_t received_ms = 0;
  std::string stream;
  int32_t partition = 0;
  int64_t offset = -1;
  std::string raw;
  std::string reason;     // names the key/field/line at fault
  int32_t status_code = 0;  // plimsoll::StatusCode value
};

// Something that happened to a series (model change, reseed, gap) or to the daemon.
struct EventRecord {
  int64_t time_ms = 0;
  std::string series;  // empty for daemon-wide events
  std::string kind;    // short tag, e.g. "model_changed"
  std::string detail;  // JSON object text
};

// The next offset to read from one stream partition, stored atomically with the states it produced.
struct PositionRecord {
  std::string stream;
  int32_t partition = 0;
  int64_t next_offset = 0;
  friend bool operator==(const PositionRecord&, const PositionRecord&) = default;
};

// An explicit refit request (`plimsoll refit`): a series id or glob pattern, taken by the daemon.
struct RefitRequestRecord {
  int64_t id = 0;
  std::string pattern;
  std::string reason;
  int64_t requested_ms = 0;
};

// Everything one group commit writes, in ONE transaction. Store::Commit takes it by const
// reference: on failure it stays with the caller, whole, to be retried.
struct CommitBatch {
  std::vector<SeriesRecord> series;  // new series (existing names are left unchanged)
  std::vector<ModelRecord> models;   // upserted per series
  std::vector<StateRecord> states;   // upserted per series
  HistoryBatch history;
  std::vector<FlagRecord> flags;     // duplicates of (series, step) ignored
  std::vector<uint32_t> flag_hints;  // empty, or one per flag (see kNoHint); names stay required
  std::vector<AlertRecord> alerts;   // duplicates of (series, step, kind) ignored
  std::vector<DeadLetterRecord> dead_letters;
  std::vector<EventRecord> events;
  std::vector<PositionRecord> positions;  // upserted per (stream, partition)

  // Total number of records in the batch.
  size_t size() const {
    return series.size() + models.size() + states.size() + history.size() + flags.size() + alerts.size() +
           dead_letters.size() + events.size() + positions.size();
  }
  bool empty() const { return size() == 0; }
  // Empties every list, keeping capacity for the next interval.
  void Clear() {
    series.clear(), models.clear(), states.clear(), history.clear(), flags.clear(), flag_hints.clear();
    alerts.clear();
    dead_letters.clear(), events.clear(), positions.clear();
  }
};

}  // namespace plimsoll::store
