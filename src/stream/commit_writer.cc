#include "stream/commit_writer.h"

#include <spdlog/spdlog.h>

#include <algorithm>
#include <chrono>

#include "plimsoll/base/thread_name.h"

namespace plimsoll::stream {

CommitWriter::CommitWriter(std::unique_ptr<store::Store> store, Clock* clock)
    : store_(std::move(store)), clock_(clock), thread_([this] { Loop(); }) {}

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
      cv_.wait(lock, [&] { return stop_ || (pending_ && !durable_); });
      if (stop_) return;
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

}  // namespace plimsoll::stream
