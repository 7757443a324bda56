#pragma once
// Helpers for refit tests: an in-memory history store shared with workers, a small engine +
// service harness driven by a ManualClock, and a deterministic series with a level shift.

#include <filesystem>
#include <map>
#include <memory>
#include <mutex>
#include <string>
#include <vector>

#include "plimsoll/base/clock.h"
#include "plimsoll/refit/refit.h"
#include "plimsoll/stream/engine.h"

namespace plimsoll::refit::testing {

constexpr int64_t kMinute = 60'000;

// A fresh directory under the system temp dir, removed with everything in it.
class TempDir {
 public:
  TempDir();
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;
  ~TempDir();
  std::string File(const std::string& name) const { return (path_ / name).string(); }

 private:
  std::filesystem::path path_;
};

// The history a store would hold, fed from engine batches; readers may run on worker threads.
class MemoryHistory {
 public:
  void Append(const stream::Engine& engine, const stream::EngineBatch& batch);
  HistoryReaderFactory Readers();
  Result<store::HistorySlice> Tail(std::string_view series, size_t n);

 private:
  std::mutex mu_;
  std::map<std::string, std::map<int64_t, double>, std::less<>> points_;  // guarded by mu_
};

// Level 100 (+ a small deterministic wiggle) for steps < shift_at, level 100 + shift after.
double ShiftedValue(int64_t step, int64_t shift_at, double shift);

stream::SeriesRules Profile(std::string match, int warmup = 24, int history = 400);

// Engine + service over MemoryHistory, pumped by hand like the daemon's group commit.
struct Harness {
  Harness(std::vector<stream::SeriesRules> profiles, RefitServiceOptions options, stream::ModelChooser chooser,
          bool background_warmup = false);
  ~Harness();
  void Feed(const std::string& series, int64_t step, double value);
  // One "group commit": take the batch, store its history, hand it to the service.
  stream::EngineBatch Pump();
  // Pumps until `done()` (or a generous guard of iterations, so a broken service fails the
  // test instead of hanging it). Returns done().
  template <typename Pred>
  bool PumpUntil(Pred done) {
    for (int i = 0; i < 20'000 && !done(); ++i) PumpAndWait();
    return done();
  }
  void PumpAndWait();
  RefitCounters Counters() const { return CountersOf(*service); }

  ManualClock clock{1'700'000'000'000};
  MemoryHistory history;
  std::unique_ptr<stream::Engine> engine;
  std::unique_ptr<stream::RefitService> service;
  std::vector<store::EventRecord> events;  // what the service asked to store
  std::vector<stream::EngineBatch> batches;
};

}  // namespace plimsoll::refit::testing
