#include "refit/refit_test_util.h"

#include <stdlib.h>

#include <chrono>
#include <stdexcept>
#include <cmath>
#include <limits>
#include <thread>

namespace plimsoll::refit::testing {

TempDir::TempDir() {
  std::string pattern = (std::filesystem::temp_directory_path() / "plimsoll-refit-test-XXXXXX").string();
  if (mkdtemp(pattern.data()) == nullptr) throw std::runtime_error("mkdtemp failed");
  path_ = pattern;
}

TempDir::~TempDir() {
  std::error_code ignored;
  std::filesystem::remove_all(path_, ignored);
}

void MemoryHistory::Append(const stream::Engine& engine, const stream::EngineBatch& batch) {
  std::lock_guard<std::mutex> lock(mu_);
  for (const stream::HistoryPoint& h : batch.history) points_[engine.SeriesName(h.series)][h.step] = h.value;
}

Result<store::HistorySlice> MemoryHistory::Tail(std::string_view series, size_t n) {
  std::lock_guard<std::mutex> lock(mu_);
  auto it = points_.find(series);
  if (it == points_.end()) return Status::NotFound("unknown series '" + std::string(series) + "'");
  store::HistorySlice slice;
  if (it->second.empty() || n == 0) return slice;
  const int64_t last = it->second.rbegin()->first;
  const int64_t first = std::max(it->second.begin()->first, last - static_cast<int64_t>(n) + 1);
  slice.first_step = first;
  for (int64_t step = first; step <= last; ++step) {
    auto p = it->second.find(step);
    slice.values.push_back(p == it->second.end() ? std::numeric_limits<double>::quiet_NaN() : p->second);
  }
  return slice;
}

namespace {
class MemoryReader final : public HistoryReader {
 public:
  explicit MemoryReader(MemoryHistory* history) : history_(history) {}
  Result<store::HistorySlice> Tail(std::string_view series, size_t n) override { return history_->Tail(series, n); }

 private:
  MemoryHistory* history_;
};
}  // namespace

HistoryReaderFactory MemoryHistory::Readers() {
  return [this]() -> Result<std::unique_ptr<HistoryReader>> {
    return std::unique_ptr<HistoryReader>(std::make_unique<MemoryReader>(this));
  };
}

double ShiftedValue(int64_t step, int64_t shift_at, double shift) {
  return 100.0 + 2.0 * std::sin(0.7 * static_cast<double>(step)) + (step >= shift_at ? shift : 0.0);
}

stream::SeriesRules Profile(std::string match, int warmup, int history) {
  stream::SeriesRules r;
  r.match = std::move(match);
  r.interval_ms = kMinute;
  r.warmup = warmup;
  r.history = history;
  r.breach_run = 3;
  r.breach_window = 3;
  r.clear_run = 3;
  return r;
}

Harness::Harness(std::vector<stream::SeriesRules> profiles, RefitServiceOptions options, stream::ModelChooser chooser,
                 bool background_warmup) {
  stream::EngineOptions engine_options;
  engine_options.profiles = std::move(profiles);
  engine_options.background_warmup = background_warmup;
  engine = std::make_unique<stream::Engine>(engine_options, chooser, &clock);
  service = MakeRefitService(std::move(options), chooser, history.Readers(), &clock);
  service->Start(*engine, {});
}

Harness::~Harness() {
  service->Stop(*engine);
  service.reset();
}

void Harness::Feed(const std::string& series, int64_t step, double value) {
  engine->Observe(series, step * kMinute, value, series, 0, step);
}

stream::EngineBatch Harness::Pump() {
  stream::EngineBatch taken = engine->TakeBatch();
  history.Append(*engine, taken);
  service->OnBatch(*engine, taken, clock.WallMillis(), events);
  batches.push_back(taken);
  return taken;
}

void Harness::PumpAndWait() {
  Pump();
  std::this_thread::sleep_for(std::chrono::milliseconds(1));
}

}  // namespace plimsoll::refit::testing
