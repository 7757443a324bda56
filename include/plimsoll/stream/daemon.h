#pragma once
// Daemon: the `watch` loop. It owns the engine and the write-behind commit writer, and drives a
// RecordSource from the owner thread:
//
//   poll -> decode -> Engine::Observe  (dead letters for bad records)
//        -> every commit_ms / commit_records: EngineBatch + source positions -> one store transaction
//        -> once durable: acknowledge positions to the source, publish outputs to the sink
//
// Exactly-once effect on states: positions are stored in the same transaction as the states they
// produced, and sources resume from them (Positions()). Outputs (flags, alerts, events) are
// at-least-once with deterministic ids.
//
// Back-pressure: while a commit is being written the loop keeps accumulating the next batch; past
// max_uncommitted_records it pauses the source's streams and polls with max_records = 0 (keeping
// a Kafka consumer alive) until the writer catches up. Nothing accepted is ever dropped.
//
// Thread-safety: Run on one thread (the owner). Counters are atomics, readable from any thread.

#include <atomic>
#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include "plimsoll/base/clock.h"
#include "plimsoll/base/status.h"
#include "plimsoll/store/store.h"
#include "plimsoll/stream/decode.h"
#include "plimsoll/stream/engine.h"
#include "plimsoll/stream/refit_service.h"
#include "plimsoll/stream/source.h"

namespace plimsoll::stream {

struct DaemonOptions {
  int64_t commit_ms = 100;             // group commit at least this often (ms): latency vs. commit cost
  size_t commit_records = 50'000;      // ... or after this many records, whichever is first
  size_t max_uncommitted_records = 1'000'000;  // beyond this, input pauses until the writer catches up
  // A checkpoint (every changed series' state together with the source positions) is written at
  // least this often (ms). Group commits in between carry history, flags, alerts, models and new
  // series, which a restart from the checkpoint re-derives identically (all idempotent); events
  // and dead letters wait for the checkpoint. Longer: fewer state writes, more input re-read
  // after a crash, positions (and Kafka's advisory commits) acknowledged later.
  // 5000 (the default): a state costs about as much to write as 25 history points, and with
  // 100k busy series writing every state at every group commit took most of the writer's time
  // (DEVELOPERS.md, "Store figures"). The file and Kafka SIGKILL tests pass with 1000 and 5000.
  // 0: every group commit is a checkpoint.
  int64_t checkpoint_ms = 5000;
  // ... and whenever this many records per changed series arrived since the last checkpoint
  // (checkpointing few busy series is cheap and keeps positions fresh). 0: only by time.
  size_t checkpoint_records_per_state = 64;
  size_t poll_records = 4096;          // records per Poll call
  int poll_timeout_ms = 20;            // how long an idle Poll waits
  // Aggregated buckets close when the bucket clock passes their end + allowed lateness. The
  // clock is the newest record time; false (live feeds): it also runs on with wall time while
  // no records arrive (silent feeds close); true (file replays, simulated time): record times
  // only, deterministic. See src/stream/bucket_clock.h.
  bool event_time = false;
  int64_t shutdown_timeout_ms = 30'000;  // how long the last commit may take at shutdown
  int history_restore_points = 2000;     // history read per warming-up series at start-up
};

// Receives what became durable (after the store transaction), e.g. to publish to Kafka.
class OutputSink {
 public:
  virtual ~OutputSink() = default;
  // Called on the owner thread with each durable batch, in commit order. Errors are counted and
  // logged by the daemon; they never stop the loop (the rows are in SQLite).
  virtual Status Publish(const store::CommitBatch& durable) = 0;
  // Waits up to `timeout_ms` until everything published was delivered. Run calls it after its
  // final commit, so a stopped daemon has handed every output over.
  virtual Status Flush(int /*timeout_ms*/) { return Status::Ok(); }
};

struct DaemonCounters {
  std::atomic<uint64_t> records{0};         // records polled from the source
  std::atomic<int64_t> position{0};         // next offset of the stream read last (files: byte offset)
  std::atomic<uint64_t> decode_errors{0};
  std::atomic<uint64_t> skipped_lines{0};   // headers, comments, blank lines
  std::atomic<uint64_t> commits{0};         // durable group commits
  std::atomic<uint64_t> pauses{0};          // times input paused for back-pressure
  std::atomic<int64_t> paused_micros{0};
  std::atomic<uint64_t> sink_errors{0};
  std::atomic<uint64_t> acknowledge_errors{0};
  std::atomic<uint64_t> refits{0};          // additive refits installed
  std::atomic<uint64_t> refit_failures{0};
};

class Daemon {
 public:
  // Loads every stored series (checkpoint + warm-up history) and position into a new engine,
  // then hands the store to the commit writer. Fails when the store cannot be read; series whose
  // profile no longer exists are skipped with a warning (their rows stay in the file).
  // `refits` (optional) runs refits and warm-up fits in the background; without it the daemon
  // fits on the owner thread (engine_options.background_warmup is then ignored).
  static Result<std::unique_ptr<Daemon>> Open(const DaemonOptions& options, EngineOptions engine_options,
                                               ModelChooser chooser, std::unique_ptr<store::Store> store,
                                               Clock* clock, std::unique_ptr<RefitService> refits = nullptr);
  ~Daemon();
  Daemon(const Daemon&) = delete;
  Daemon& operator=(const Daemon&) = delete;

  // Stored positions as of the last durable commit: give this to sources when opening them.
  PositionLookup Positions() const;

  // For Kafka sources: on revoke, commits everything consumed so far and waits until it is
  // durable (inside Run); outside Run there is nothing uncommitted and it does nothing.
  PartitionListener* Listener();

  // Runs until the source ends (Aborted from Poll) or `stop` becomes true, then commits what it
  // holds and waits for it to be durable. Returns OK, or the source's fatal error, or Unavailable
  // when the final commit could not be made durable in time (nothing is lost: positions were not
  // stored, so the records are read again on restart, except from stdin).
  Status Run(RecordSource& source, RecordDecoder& decoder, const std::atomic<bool>& stop, OutputSink* sink = nullptr);

  const Engine& engine() const { return *engine_; }
  // The background refit service given to Open, or null.
  const RefitService* refits() const;
  const DaemonCounters& counters() const { return counters_; }
  store::StoreCounters StoreCounters() const;

 private:
  struct Impl;
  Daemon(const DaemonOptions& options, std::unique_ptr<Engine> engine, std::string store_path, Clock* clock);
  // Refits a series queued by the engine from its durable history (read connection).
  void RefitQueued(SeriesId id);

  DaemonOptions options_;
  std::unique_ptr<Engine> engine_;
  std::unique_ptr<Impl> impl_;
  DaemonCounters counters_;
};

// Engine options from the loaded configuration (profiles resolved to SeriesRules).
struct Config;
EngineOptions EngineOptionsFromConfig(const Config& config);
DaemonOptions DaemonOptionsFromConfig(const Config& config);

}  // namespace plimsoll::stream
