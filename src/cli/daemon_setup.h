#pragma once
// Shared start-up for the verbs that run the daemon loop (watch, backfill, demo): configuration,
// logging, the store, the daemon and orderly stop on SIGINT/SIGTERM.

#include <signal.h>

#include <atomic>
#include <memory>
#include <string>
#include <thread>

#include "plimsoll/base/status.h"
#include "plimsoll/store/store.h"
#include "plimsoll/stream/config.h"
#include "plimsoll/stream/daemon.h"

namespace plimsoll::cli {

// Loads `path`, or the built-in defaults (stdin source, one profile matching every series) when
// empty. Errors name the file, line and key.
Result<stream::Config> LoadConfig(const std::string& path);

// Applies [logging]: level and optional file. Fails naming the key for an unknown level.
Status ApplyLogging(const stream::LoggingOptions& logging);

store::StoreOptions StoreOptionsFor(const stream::Config& config);

// Opens the store and a daemon over it with the fit-based model chooser.
Result<std::unique_ptr<stream::Daemon>> OpenDaemon(const stream::Config& config, Clock* clock);

// Blocks SIGINT and SIGTERM in the calling thread (and so in every thread started after it) and
// sets `requested()` when one arrives. Create it first, before any other thread starts.
class StopOnSignal {
 public:
  StopOnSignal();
  ~StopOnSignal();
  StopOnSignal(const StopOnSignal&) = delete;
  StopOnSignal& operator=(const StopOnSignal&) = delete;
  const std::atomic<bool>& requested() const { return requested_; }
  // Sets the flag as a signal would (used when a verb ends on its own, e.g. a demo's duration).
  void Request() { requested_.store(true); }

 private:
  sigset_t signals_;
  std::atomic<bool> requested_{false};
  std::atomic<bool> done_{false};
  std::thread waiter_;
};

// One line per counter family, for the end of a run.
std::string RunSummary(const stream::Daemon& daemon);

}  // namespace plimsoll::cli
