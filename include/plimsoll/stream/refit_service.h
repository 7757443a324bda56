#pragma once
// RefitService: background model refits as the daemon sees them. The refit module implements it
// (plimsoll::refit::MakeRefitService, wired in src/cli/daemon_setup.cc); stream only calls it, so
// stream does not depend on the thread pool that runs the fits.
//
// The daemon calls it on its owner thread at each group commit with the batch just taken from
// the engine. Finished refits are installed into the engine there (their model changes join the
// engine's next batch, which the daemon stores as a checkpoint); nothing on the per-record path
// waits for a fit.
//
// Thread-safety: every method is called on the daemon's owner thread.

#include <cstdint>
#include <string>
#include <vector>

#include "plimsoll/store/records.h"
#include "plimsoll/stream/engine.h"

namespace plimsoll::stream {

// A series loaded from the store at start-up, with what the store remembers of its model.
struct RestoredSeries {
  SeriesId id;
  std::string stored_profile;  // the profile recorded for it (may differ from the one matching now)
  int64_t model_fitted_ms;     // when its model was chosen; 0 when it has none
  double model_aicc;           // the stored model's AICc; NaN when it has none
};

class RefitService {
 public:
  virtual ~RefitService() = default;

  // Called once by Daemon::Open after the stored series are restored, before Run.
  virtual void Start(Engine& engine, const std::vector<RestoredSeries>& restored) = 0;

  // Called at each group commit with the batch just taken from `engine`, after the commit's
  // rows and checkpoints were encoded from it: installs finished fits (their effects join the
  // engine's next batch), queues refits the batch triggers, hands queued work to the workers,
  // and appends event rows (model changes, failures, discards) to `events`, which the daemon
  // stores with the next checkpoint. Returns the number of models installed. Never blocks on a fit.
  virtual size_t OnBatch(Engine& engine, const EngineBatch& taken, int64_t now_ms,
                         std::vector<store::EventRecord>& events) = 0;

  // End of Run: drops queued refits, runs the queued first fits (warm-ups: a stopped daemon
  // leaves no series without its model that an inline fit would have given one) and waits for
  // everything running (each bounded by its time budget); the next OnBatch installs what
  // finished. The service takes no new work afterwards.
  virtual void Stop(Engine& engine) = 0;

  // One line of counters for the end-of-run summary.
  virtual std::string Summary() const = 0;
};

}  // namespace plimsoll::stream
