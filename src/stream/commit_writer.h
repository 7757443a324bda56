#pragma once
// CommitWriter: the write-behind stage. The owner thread hands it one store::CommitBatch at a
// time; a dedicated thread writes it to SQLite (Store::Commit: one transaction with the source
// positions) and hands it back once durable, so the owner can acknowledge positions and publish
// outputs. While a batch is being written the owner keeps accumulating the next one, so commits
// grow with load (group commit) instead of stalling the hot path.
//
// A failing commit (disk full, read-only, busy) is retried with backoff, counted and logged
// (rate-limited); the batch is never dropped. Back-pressure: Submit blocks while a batch is in
// flight, and the owner only calls it when it must (see Daemon).
//
// Store upkeep runs on a second thread (`plimsoll-upkeep`) with its own connection, so commits go
// on meanwhile:
// - History compaction: once the store's log holds history_compact_points points, that thread
//   reads and regroups it (Store::PrepareCompaction); the writer thread then only appends the
//   prepared rows between two commits (ApplyCompaction). Done inside Commit, the whole compaction
//   held up the next commit (0.7-1.3 s per 3M points at 100k series).
// - WAL checkpoints: each time commits add a quarter of wal_autocheckpoint_pages to the WAL, that
//   thread copies what is there into the database file (Store::CheckpointWal); the writer then
//   copies the few pages committed meanwhile between two commits, which lets the next commit
//   start the WAL over (checkpoints beside a busy writer never catch up: the WAL grew without
//   bound). Done wholly by the writer after a large commit, as SQLite's auto-checkpoint does, one
//   took ~0.2 s. The writer also checkpoints between commits while the WAL holds
//   wal_autocheckpoint_pages or more, as SQLite would after a commit.
//
// Thread-safety: Submit/TakeDurable/WaitIdle/Stop from the owner thread; the writer thread is
// internal. The mutex guards only the hand-over slots, never the per-observation path.

#include <atomic>
#include <condition_variable>
#include <cstdint>
#include <memory>
#include <mutex>
#include <optional>
#include <thread>

#include "plimsoll/base/clock.h"
#include "plimsoll/base/status.h"
#include "plimsoll/store/store.h"

namespace plimsoll::stream {

struct CommitWriterCounters {
  std::atomic<uint64_t> batches{0};        // durable commits
  std::atomic<uint64_t> failed_attempts{0};
  std::atomic<uint64_t> submit_waits{0};   // Submit calls that had to wait for the writer
  std::atomic<int64_t> submit_wait_micros{0};
  std::atomic<int64_t> last_commit_micros{0};
  std::atomic<uint64_t> compactions_prepared{0};  // by the upkeep thread
  std::atomic<uint64_t> compaction_errors{0};     // preparations or applications that failed (retried later)
  std::atomic<uint64_t> checkpoints{0};           // WAL checkpoints by the upkeep thread
  std::atomic<int64_t> checkpoint_micros{0};
  std::atomic<uint64_t> checkpoint_errors{0};     // failed ones (the WAL only grows until the next)
};

class CommitWriter {
 public:
  // Takes ownership of the store; from now on only the writer thread touches it.
  CommitWriter(std::unique_ptr<store::Store> store, Clock* clock);
  // Stops after the batch in flight (see Stop). Never throws.
  ~CommitWriter();
  CommitWriter(const CommitWriter&) = delete;
  CommitWriter& operator=(const CommitWriter&) = delete;

  // True while a submitted batch is not yet durable.
  bool busy() const;
  // Hands a batch over; waits (counted) while the previous one is still in flight.
  void Submit(store::CommitBatch batch);
  // The batch made durable since the last call, if any (its positions may be acknowledged).
  std::optional<store::CommitBatch> TakeDurable();
  // Waits until the batch in flight is durable or `timeout_ms` passes. Returns Unavailable
  // naming the last error when the time passed with the batch unwritten. REQUIRES: the previous
  // durable batch was taken (the writer hands batches back in order).
  Status WaitDurable(int64_t timeout_ms);
  // Ends the writer thread after its current attempt. A batch still unwritten stays unwritten:
  // the positions it carried were never stored, so the source re-reads those records.
  void Stop();

  const CommitWriterCounters& counters() const { return counters_; }
  // The store's own counters, copied under the lock (for metrics).
  store::StoreCounters StoreCounters() const;

 private:
  void Loop();
  void UpkeepLoop(std::unique_ptr<store::Store> upkeep);
  // After a commit (writer thread, mu_ held): asks for a compaction once the log is long enough
  // and for a checkpoint once the WAL is.
  void RequestUpkeepIfDue();

  std::unique_ptr<store::Store> store_;
  Clock* clock_;
  int64_t compact_points_;              // the store's history_compact_points
  int64_t checkpoint_pages_;            // the store's wal_autocheckpoint_pages (0: never)
  CommitWriterCounters counters_;
  mutable std::mutex mu_;
  std::condition_variable cv_;
  std::optional<store::CommitBatch> pending_;  // GUARDED_BY(mu_): submitted, not yet durable
  std::optional<store::CommitBatch> durable_;  // GUARDED_BY(mu_): durable, not yet taken
  Status last_error_;                          // GUARDED_BY(mu_)
  store::StoreCounters store_counters_;        // GUARDED_BY(mu_)
  bool stop_ = false;                          // GUARDED_BY(mu_)
  // Upkeep (see the file comment).
  bool compaction_wanted_ = false;                         // GUARDED_BY(mu_)
  bool compaction_in_progress_ = false;                    // GUARDED_BY(mu_): requested, not yet applied
  bool checkpoint_wanted_ = false;                         // GUARDED_BY(mu_): requested, not yet run
  int64_t checkpointed_frames_ = 0;  // GUARDED_BY(mu_): the WAL's length at the last request
  bool finish_checkpoint_ = false;   // GUARDED_BY(mu_): the writer copies the rest between commits
  std::optional<store::PreparedCompaction> prepared_;      // GUARDED_BY(mu_)
  store::PreparedCompaction spent_;  // GUARDED_BY(mu_): the last applied one, its buffers lent to the next
  std::thread upkeep_;                         // started after every member it uses exists
  std::thread thread_;                         // last: started after every member exists
};

}  // namespace plimsoll::stream
