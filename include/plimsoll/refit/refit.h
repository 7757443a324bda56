#pragma once
// Background refits: a RefitService (stream/refit_service.h) that fits on a Boost.Asio thread
// pool and installs results on the daemon's owner thread.
//
//   owner (OnBatch):  triggers -> RefitQueue -> post job (series, snapshot step S) to the pool
//   worker:           history through S (warm-up: the engine's buffered prefix; else the store's
//                     read connection) -> ModelChooser under the time/evaluation budget -> done list
//   owner (OnBatch):  replays the steps that arrived after S (captured from the batches meanwhile)
//                     with the new model and swaps it in (Engine::InstallModel), or discards it
//
// A result is discarded and counted when its series moved on by more than max_lag_steps, was
// re-seeded, or got another model meanwhile. A fit that fails or exceeds its budget keeps the
// current model; the event says why. Design and figures: notes/refit-docs.md.
//
// Thread-safety: the service's methods run on the owner thread; workers touch only their job,
// a HistoryReader they check out, and the mutex-guarded done list.

#include <cstdint>
#include <functional>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "plimsoll/base/clock.h"
#include "plimsoll/base/status.h"
#include "plimsoll/refit/scheduler.h"
#include "plimsoll/store/store.h"
#include "plimsoll/stream/config.h"
#include "plimsoll/stream/engine.h"
#include "plimsoll/stream/refit_service.h"

namespace plimsoll::refit {

// Reads a series' stored history for a worker. One reader is used by one worker at a time.
class HistoryReader {
 public:
  virtual ~HistoryReader() = default;
  // The last `n` stored steps of `series` (NaN gaps), ending at its newest durable step.
  virtual Result<store::HistorySlice> Tail(std::string_view series, size_t n) = 0;
};
// Makes a reader for a worker; called at most once per worker thread.
using HistoryReaderFactory = std::function<Result<std::unique_ptr<HistoryReader>>()>;

// Readers over read-only connections to the store file at `options.path`.
HistoryReaderFactory StoreHistoryReaders(store::StoreOptions options);

struct RefitServiceOptions {
  int threads = 1;                    // worker threads (>= 1); see DefaultThreads
  size_t queue_capacity = 10'000;     // queued refits beyond this follow OverflowPolicy
  int64_t time_budget_ms = 10'000;    // per refit (fit wall time); over it the current model stays
  int64_t max_lag_steps = 10'000;     // a result whose series moved on by more steps is discarded
  int64_t age_scan_ms = 1'000;        // how often model ages are checked (owner-thread time)
  std::vector<TriggerRules> profiles; // by engine profile index (EngineOptions::profiles order)
  // Where explicit requests (`plimsoll refit`) are read from; empty: none. Polled every
  // request_poll_ms at a group commit, through its own connection.
  std::string requests_path;
  int64_t request_poll_ms = 1'000;
};

// cores - 1, at least 1.
int DefaultThreads();

// Service options from the configuration ([refit] and each [[profile]]'s refit_* keys).
RefitServiceOptions RefitServiceOptionsFromConfig(const stream::Config& config);

// Counters, readable after Stop or from the owner thread.
struct RefitCounters {
  uint64_t started = 0;       // jobs handed to workers (refits and warm-up fits)
  uint64_t installed = 0;     // refits swapped in
  uint64_t warmups = 0;       // warm-up fits handed back to the engine
  uint64_t failed = 0;        // fit failed or history unreadable: model kept
  uint64_t timed_out = 0;     // over the time budget: model kept
  uint64_t discarded_lag = 0;       // series moved on by more than max_lag_steps
  uint64_t discarded_reseeded = 0;  // series re-seeded (or warming up again) meanwhile
  uint64_t discarded_refitted = 0;  // another model was installed meanwhile
  uint64_t requests = 0;      // explicit request rows read
  QueueCounters queue;
};

// REQUIRES: chooser deterministic and callable from several threads; clock outlives the service.
// `chooser` should carry the evaluation budget (fit::FitOptions::max_evaluations).
// Throws std::invalid_argument for invalid options (start-up only).
std::unique_ptr<stream::RefitService> MakeRefitService(RefitServiceOptions options, stream::ModelChooser chooser,
                                                       HistoryReaderFactory readers, Clock* clock);

// Records an explicit refit request for the stored series matching `pattern` (a series id or a
// glob, see stream::GlobMatch) in `store` (read-write); a running daemon takes it within
// request_poll_ms, a stopped one at its next start. Returns how many stored series match now.
// InvalidArgument for a bad glob, NotFound when no stored series matches (nothing recorded).
Result<size_t> RequestRefit(store::Store& store, std::string_view pattern, std::string_view reason,
                            int64_t now_ms);

// The counters of a service made by MakeRefitService (owner thread).
RefitCounters CountersOf(const stream::RefitService& service);

}  // namespace plimsoll::refit
