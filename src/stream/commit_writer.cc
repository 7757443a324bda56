#include "stream/commit_writer.h"

#include <spdlog/spdlog.h>

#include <algorithm>
#include <chrono>

#include "plimsoll/base/thread_name.h"

namespace plimsoll::stream {

namespace {

store::StoreOptions UpkeepOptions(const store::StoreOptions& writer) {
  store::StoreOptions out = writer;  // read-write: a checkpoint writes the database file
  out.cache_kib = 8 * 1024;  // it reads the log once per compaction; the writer's cache matters more
  return out;
}

}  // namespace

CommitWriter::CommitWriter(std::unique_ptr<store::Store> store, Clock* clock)
    : store_(std::move(store)),
      clock_(clock),
      compact_points_(store_->options().history_compact_points),
      checkpoint_pages_(store_->options().wal_autocheckpoint_pages) {
  if (!store_->options().read_only) {
    // Opened here, before any commit: opened beside a busy writer, the connection took tens of
    // commits to open and meanwhile the writer's checkpoints met SQLITE_BUSY.
    Result<std::unique_ptr<store::Store>> upkeep = store::Store::Open(UpkeepOptions(store_->options()));
    if (upkeep.ok()) {
      store_->SetCompactInCommit(false);
      store_->SetCheckpointInCommit(false);
      upkeep_ = std::thread([this, connection = std::move(upkeep).value()]() mutable {
        UpkeepLoop(std::move(connection));
      });
    } else {
      spdlog::warn("store upkeep connection could not be opened; the writer compacts and checkpoints itself: {}",
                   upkeep.status().ToString());
    }
  }
  thread_ = std::thread([this] { Loop(); });
}

CommitWriter::~CommitWriter() { Stop(); }

bool CommitWriter::busy() const {
  std::lock_guard lock(mu_);
  return pending_.has_value();
}

void CommitWriter::Submit(store::CommitBatch batch) {
  std::unique_lock lock(mu_);
  if (pending_) {
    counters_.submit_waits.fetch_add(1, std::memory_order_relaxed);
    const int64_t start = clock_->MonotonicNanos();
    cv_.wait(lock, [&] { return !pending_ || stop_; });
    counters_.submit_wait_micros.fetch_add((clock_->MonotonicNanos() - start) / 1000, std::memory_order_relaxed);
  }
  // If the previous batch is durable but not yet taken, the writer holds this one until it is.
  pending_ = std::move(batch);
  cv_.notify_all();
}

std::optional<store::CommitBatch> CommitWriter::TakeDurable() {
  std::lock_guard lock(mu_);
  std::optional<store::CommitBatch> out = std::move(durable_);
  durable_.reset();
  cv_.notify_all();
  return out;
}

Status CommitWriter::WaitDurable(int64_t timeout_ms) {
  std::unique_lock lock(mu_);
  const bool done = cv_.wait_for(lock, std::chrono::milliseconds(timeout_ms), [&] { return !pending_; });
  if (done) return Status::Ok();
  return Status::Unavailable("group commit not durable after " + std::to_string(timeout_ms) +
                             " ms; last error: " + last_error_.ToString());
}

void CommitWriter::Stop() {
  {
    std::lock_guard lock(mu_);
    stop_ = true;
    cv_.notify_all();
  }
  if (thread_.joinable()) thread_.join();
  if (upkeep_.joinable()) upkeep_.join();
}

store::StoreCounters CommitWriter::StoreCounters() const {
  std::lock_guard lock(mu_);
  return store_counters_;
}

void CommitWriter::Loop() {
  NameThisThread("plimsoll-commit");
  int failures_in_row = 0;
  int64_t next_log_ns = 0;
  for (;;) {
    store::CommitBatch* batch = nullptr;
    {
      std::unique_lock lock(mu_);
      // A durable batch must be taken before the next one is written, so hand-back stays in order.
      cv_.wait(lock, [&] { return stop_ || (pending_ && !durable_) || prepared_ || finish_checkpoint_; });
      if (stop_) return;
      if (finish_checkpoint_ && !prepared_) {
        // The upkeep thread copied the bulk of the WAL; copying the rest here, with no commit
        // running, lets the next commit start the WAL over.
        finish_checkpoint_ = false;
        lock.unlock();
        Status finished = store_->CheckpointWal();
        lock.lock();
        if (!finished.ok()) {
          counters_.checkpoint_errors.fetch_add(1, std::memory_order_relaxed);
          spdlog::warn("WAL checkpoint on the writer failed (the WAL grows until a later one): {}",
                       finished.ToString());
        }
        store_counters_ = store_->counters();
        continue;
      }
      if (prepared_) {
        // Between two commits: append what the upkeep thread prepared (the next batch, if
        // one came meanwhile, waits for it; it is much shorter than preparing).
        store::PreparedCompaction prepared = std::move(*prepared_);
        prepared_.reset();
        lock.unlock();
        Status applied = store_->ApplyCompaction(prepared);
        lock.lock();
        if (!applied.ok()) {
          counters_.compaction_errors.fetch_add(1, std::memory_order_relaxed);
          spdlog::warn("history compaction not applied (the log stays; retried after a later commit): {}",
                       applied.ToString());
        }
        compaction_in_progress_ = false;
        spent_ = std::move(prepared);
        store_counters_ = store_->counters();
        RequestUpkeepIfDue();
        continue;
      }
      batch = &*pending_;  // stays valid: only this thread resets pending_
    }
    const int64_t start = clock_->MonotonicNanos();
    Status status = store_->Commit(*batch);
    std::unique_lock lock(mu_);
    store_counters_ = store_->counters();
    if (status.ok()) {
      failures_in_row = 0;
      counters_.batches.fetch_add(1, std::memory_order_relaxed);
      counters_.last_commit_micros.store((clock_->MonotonicNanos() - start) / 1000, std::memory_order_relaxed);
      durable_ = std::move(pending_);
      pending_.reset();
      last_error_ = Status::Ok();
      RequestUpkeepIfDue();
      cv_.notify_all();
      continue;
    }
    // Never drop the batch: retry with backoff until it lands or we are stopped.
    counters_.failed_attempts.fetch_add(1, std::memory_order_relaxed);
    last_error_ = status;
    ++failures_in_row;
    const int64_t now = clock_->MonotonicNanos();
    if (now >= next_log_ns) {
      spdlog::error("group commit failed ({} attempts in a row), retrying; input is held back: {}", failures_in_row,
                    status.ToString());
      next_log_ns = now + 5'000'000'000;  // at most one line per 5 s
    }
    const int backoff_ms = std::min(2000, 10 << std::min(failures_in_row, 8));
    cv_.wait_for(lock, std::chrono::milliseconds(backoff_ms), [&] { return stop_; });
    if (stop_) return;
  }
}

void CommitWriter::RequestUpkeepIfDue() {
  if (!upkeep_.joinable()) return;
  if (!compaction_in_progress_ && store_counters_.log_points >= compact_points_) {
    compaction_in_progress_ = true;
    compaction_wanted_ = true;
    cv_.notify_all();
  }
  // The WAL restarted (a checkpoint copied all of it): count its growth from the start again.
  if (store_counters_.wal_frames < checkpointed_frames_) checkpointed_frames_ = 0;
  if (checkpoint_pages_ <= 0) return;
  if (!checkpoint_wanted_ && store_counters_.wal_frames >= checkpointed_frames_ + checkpoint_pages_ / 4) {
    checkpoint_wanted_ = true;
    checkpointed_frames_ = store_counters_.wal_frames;
    cv_.notify_all();
  }
  // At the threshold the writer checkpoints between commits as SQLite would after one (again
  // after each commit while the WAL stays that long), finding most of it copied already.
  if (store_counters_.wal_frames >= checkpoint_pages_) finish_checkpoint_ = true;
}

void CommitWriter::UpkeepLoop(std::unique_ptr<store::Store> upkeep) {
  NameThisThread("plimsoll-upkeep");
  store::PreparedCompaction recycled;
  for (;;) {
    bool checkpoint = false, compact = false;
    {
      std::unique_lock lock(mu_);
      cv_.wait(lock, [&] { return stop_ || compaction_wanted_ || checkpoint_wanted_; });
      if (stop_) return;
      checkpoint = checkpoint_wanted_;
      compact = compaction_wanted_;
      compaction_wanted_ = false;
      if (compact) recycled = std::move(spent_);
    }
    if (checkpoint) {
      const store::StoreCounters before = upkeep->counters();
      Status status = upkeep->CheckpointWal();
      // Counted from the connection's own figures: a checkpoint that met the writer's (SQLITE_BUSY)
      // returns OK having copied nothing.
      const store::StoreCounters& after = upkeep->counters();
      std::lock_guard lock(mu_);
      checkpoint_wanted_ = false;  // asked for again after a later commit while the WAL stays long
      if (status.ok()) {
        finish_checkpoint_ = true;
        cv_.notify_all();
        counters_.checkpoints.fetch_add(after.wal_checkpoints - before.wal_checkpoints, std::memory_order_relaxed);
        counters_.checkpoint_micros.fetch_add(after.wal_checkpoint_micros - before.wal_checkpoint_micros,
                                              std::memory_order_relaxed);
      } else {
        counters_.checkpoint_errors.fetch_add(1, std::memory_order_relaxed);
        spdlog::warn("WAL checkpoint failed (the WAL grows until a later one): {}", status.ToString());
      }
    }
    if (!compact) continue;
    Result<store::PreparedCompaction> prepared = upkeep->PrepareCompaction(INT64_MAX, std::move(recycled));
    if (!prepared.ok()) {
      std::lock_guard lock(mu_);
      counters_.compaction_errors.fetch_add(1, std::memory_order_relaxed);
      spdlog::warn("history compaction could not be prepared (retried after a later commit): {}",
                   prepared.status().ToString());
      compaction_in_progress_ = false;
      continue;
    }
    std::lock_guard lock(mu_);
    if (prepared->empty()) {
      compaction_in_progress_ = false;
    } else {
      counters_.compactions_prepared.fetch_add(1, std::memory_order_relaxed);
      prepared_ = std::move(prepared).value();
    }
    cv_.notify_all();
  }
}

}  // namespace plimsoll::stream
