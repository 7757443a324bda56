#pragma once
// Engine: the owner-thread core of plimsoll. It takes decoded observations, routes each to its
// series (creating series on first sight from the first matching profile), aligns it on the
// series' interval grid, advances the series' ETS model one step, flags values outside the
// one-step band, tracks alerts, and collects everything that must become durable in an
// EngineBatch that the caller commits (with the source positions) in one store transaction.
//
// Thread-safety: none. One thread (the owner) calls every method; no locks on the per-observation
// path. Other threads see engine data only through snapshots the owner publishes.

#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "plimsoll/base/clock.h"
#include "plimsoll/base/status.h"
#include "plimsoll/model/params.h"
#include "plimsoll/model/spec.h"
#include "plimsoll/model/state.h"
#include "plimsoll/stream/rules.h"

namespace plimsoll::stream {

// Result of fitting a series' history (the fit module provides it through a ModelChooser).
struct ModelChoice {
  model::ModelSpec spec;
  model::Params params;
  model::State initial;  // state before history[0]; sigma2 set
  double loglik = 0.0;
  double aicc = 0.0;
  std::string note;      // e.g. "seasonal states kept from the heuristic (m > 24)"
};

// Fits `history` (NaN = missing) under `rules`; `additive_only` restricts to additive forms (a
// non-positive value reached a multiplicative model). Must be deterministic.
using ModelChooser =
    std::function<Result<ModelChoice>(std::span<const double> history, const SeriesRules& rules, bool additive_only)>;

using SeriesId = uint32_t;

struct FlagRecord {
  SeriesId series;
  int64_t step;
  int64_t time_ms;
  double value;
  double expected;
  double lower;
  double upper;
  double level;  // two-sided band level, e.g. 0.99
  double score;  // standardised innovation: innovation / sigma
  model::ModelSpec form;
};

enum class AlertKind : uint8_t { kRaised = 1, kCleared = 2 };

struct AlertRecord {
  SeriesId series;
  int64_t step;
  int64_t time_ms;
  AlertKind kind;
};

struct HistoryPoint {
  SeriesId series;
  int64_t step;
  double value;  // NaN: gap
};

struct DeadLetter {
  std::string raw;      // the record as received, truncated to EngineOptions::dead_letter_bytes
  std::string reason;   // names the record's problem, e.g. "late: step 12 of 'queue-3' already passed"
  StatusCode code;
  int32_t stream_index; // RecordSource::Streams() index, -1 when not from a source
  int64_t offset;
};

// Never renumber: stored in the events table.
enum class EventKind : uint8_t { kModelChosen = 1, kReseeded = 2, kFitFailed = 3, kRefitQueued = 4, kCreated = 5 };

struct EngineEvent {
  SeriesId series;
  int64_t step;
  EventKind kind;
  std::string detail;  // JSON object text
};

// A model put in force for a series (after warm-up or a refit).
struct ModelChange {
  SeriesId series;
  int64_t step;
  ModelChoice choice;
  std::string reason;  // "warmup" or the caller's reason for InstallModel
  std::optional<model::ModelSpec> previous;  // the form it replaced; none for a first model
};

// Everything since the last TakeBatch() that must become durable together.
struct EngineBatch {
  std::vector<FlagRecord> flags;
  std::vector<AlertRecord> alerts;
  std::vector<HistoryPoint> history;
  std::vector<DeadLetter> dead_letters;
  std::vector<EngineEvent> events;
  std::vector<ModelChange> models;
  std::vector<SeriesId> dirty;  // series whose checkpoint changed (each once)
  size_t observations = 0;      // records accepted
  bool empty() const {
    return observations == 0 && dead_letters.empty() && events.empty() && models.empty() && dirty.empty();
  }
  // Empties every list, keeping capacity.
  void Clear() {
    flags.clear(), alerts.clear(), history.clear(), dead_letters.clear(), events.clear(), models.clear();
    dirty.clear();
    observations = 0;
  }
};

struct EngineOptions {
  std::vector<SeriesRules> profiles;  // first match wins; a series no profile matches is dead-lettered
  bool create_series = true;          // false: records for unknown series are dead-lettered
  size_t max_series = 10'000'000;     // creation beyond this is refused (dead letter), protects memory
  size_t dead_letter_bytes = 1024;    // raw record bytes kept per dead letter
  // false: the first fit runs inside Observe on the owner thread (stalls it for the fit).
  // true: the engine queues a WarmupRequest (TakeWarmupRequests) and keeps buffering the series
  // until CompleteWarmup brings the model; a series buffering more than `history` points while it
  // waits is fitted inline once, so memory and restart stay bounded.
  bool background_warmup = false;
};

// A warm-up fit to run off the owner thread: `values` are the series' first buffered steps (NaN
// for gaps) through the observation that completed the warm-up; the fit result goes back with
// Engine::CompleteWarmup. The same buffered data always yields the same request, so a restart
// asks for exactly the fit an uninterrupted run asked for.
struct WarmupRequest {
  SeriesId series;
  uint32_t epoch;  // identifies this warm-up round; a stale completion is refused
  std::vector<double> values;
  bool additive_only;
};

// One decoded record for Engine::ObserveBatch; the views must stay valid for the call.
struct Observation {
  std::string_view series;
  int64_t time_ms;
  double value;
  std::string_view raw;  // the record as received (dead letters keep a prefix of it)
  int32_t stream_index;  // RecordSource::Streams() index, -1 when not from a source
  int64_t offset;
};

struct EngineCounters {
  uint64_t observations = 0;  // accepted records
  uint64_t steps = 0;         // model updates including gap steps
  uint64_t flags = 0;
  uint64_t alerts_raised = 0;
  uint64_t alerts_cleared = 0;
  uint64_t dead_letters = 0;
  uint64_t fits = 0;
  uint64_t fit_failures = 0;
  uint64_t reseeds = 0;
};

// Snapshot of one series for readers (inspect, HTTP).
struct SeriesView {
  SeriesId id;
  std::string name;
  std::string profile;
  bool warming_up;
  int64_t last_step;
  std::optional<model::ModelSpec> form;
  model::Params params;
  model::State state;
  bool alert_active;
  bool additive_only;  // a non-positive value was seen: only additive forms qualify
};

// A series checkpoint as stored (Engine::EncodeCheckpoint), decoded for readers (inspect, HTTP).
struct CheckpointView {
  bool warming_up = true;
  bool additive_only = false;
  model::ModelSpec spec;    // meaningful when !warming_up
  model::Params params;
  model::State state;       // empty while warming up
  int64_t last_step = 0;
  int64_t open_bucket_step = 0;  // INT64_MIN when no aggregation bucket is open
  int64_t last_time_ms = 0;
  bool alert_active = false;
  uint32_t warmup_points = 0;    // buffered warm-up points (rebuilt from history on restore)
};
// Fails with Corruption naming what is wrong.
Result<CheckpointView> DecodeCheckpoint(std::string_view bytes);

class Engine {
 public:
  // REQUIRES: chooser non-null, clock non-null and outliving the engine. Throws std::invalid_argument
  // for invalid profiles (start-up only).
  Engine(EngineOptions options, ModelChooser chooser, Clock* clock);
  ~Engine();
  Engine(const Engine&) = delete;
  Engine& operator=(const Engine&) = delete;

  // Applies one decoded observation. Problems (unknown series, late step, non-positive value for
  // a multiplicative form, ...) become dead letters carrying `raw`; never fails.
  void Observe(std::string_view series, int64_t time_ms, double value, std::string_view raw,
               int32_t stream_index, int64_t offset);

  // Applies `records` in order with exactly the effect of calling Observe on each; faster for
  // many records (it loads each record's series data while earlier records are applied).
  void ObserveBatch(std::span<const Observation> records);

  // Records a record that could not be decoded.
  void RejectRecord(std::string_view raw, const Status& why, int32_t stream_index, int64_t offset);

  // Closes aggregation buckets whose time has passed (silent count feeds yield zero steps).
  void AdvanceClock(int64_t now_ms);

  // Moves the pending durable work out (the caller commits it). `recycled`: an earlier batch,
  // done with, whose buffers the next batch reuses (its contents are dropped); a batch of
  // hundreds of thousands of points is megabytes that would otherwise be mapped afresh each time.
  EngineBatch TakeBatch(EngineBatch recycled = {});

  // Series whose model must be refitted (today: a non-positive value met a multiplicative form,
  // so the refit is restricted to additive forms), each once since the last call.
  std::vector<SeriesId> TakeRefitRequests();

  // Warm-up fits queued since the last call (background_warmup only), each series once per round.
  std::vector<WarmupRequest> TakeWarmupRequests();

  // Brings the result of a WarmupRequest: installs the model, replays the request's values, then
  // applies the steps buffered since through the live path (flags and alerts as if the model had
  // been there when they arrived). A failed fit is recorded like an inline one and the warm-up
  // continues. Aborted when the request is stale (series re-seeded or fitted since).
  Status CompleteWarmup(SeriesId id, uint32_t epoch, const Result<ModelChoice>& choice);

  // Swaps in a new model for a series: replays `history` (every step from the one the choice's
  // initial state precedes through the series' last step, NaN for gaps) with the new model and
  // replaces model and state. Values from index `live_from` on are replayed the way the live
  // path applies them (the profile's flag policy against the new model's band, nothing emitted),
  // so a catch-up after a background fit gives the state an inline refit at that point would have.
  // InvalidArgument when the series is still warming up, NumericFailure when the replay fails;
  // the current model stays then.
  static constexpr size_t kRawReplay = static_cast<size_t>(-1);
  Status InstallModel(SeriesId id, const ModelChoice& choice, std::span<const double> history,
                      std::string_view reason, size_t live_from = kRawReplay);

  // Fits the series afresh on `history` (its stored steps through its last one, NaN for gaps)
  // with the engine's chooser (additive forms only once a non-positive value was seen) and
  // installs the result with InstallModel. The current model stays when either step fails.
  Status Refit(SeriesId id, std::span<const double> history, std::string_view reason);

  // Serialises a series' full checkpoint (model, state, alignment, alerts) for the store, and
  // restores one at start-up. A series still warming up needs its stored history tail (at least
  // the profile's `history` steps, NaN for gaps) to rebuild its warm-up buffer. Restore fails
  // with Corruption for a bad blob or too short a history.
  std::string EncodeCheckpoint(SeriesId id) const;
  // `warmup_history` is called only for a series that is still warming up.
  using HistoryFetcher = std::function<Result<std::vector<double>>()>;
  Status RestoreSeries(std::string_view name, std::string_view checkpoint, const HistoryFetcher& warmup_history);

  const std::string& SeriesName(SeriesId id) const;
  // The newest step applied to a series and the time of the record that produced it.
  struct Position {
    int64_t last_step;
    int64_t last_time_ms;
  };
  Position SeriesPosition(SeriesId id) const;
  std::optional<SeriesId> FindSeries(std::string_view name) const;
  size_t series_count() const;
  SeriesView View(SeriesId id) const;
  const EngineCounters& counters() const { return counters_; }
  const EngineOptions& options() const { return options_; }

  // Resident bytes of the per-series structures (benchmark figure).
  size_t ResidentBytes() const;

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
  EngineOptions options_;
  EngineCounters counters_;
};

}  // namespace plimsoll::stream
