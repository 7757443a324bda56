#pragma once
// StepAligner: puts one series' records on its interval grid.
//
// Step k covers [k * interval, (k + 1) * interval) in epoch milliseconds. Without aggregation
// each record is one step; a record for step k yields, in order:
//   - k == last + 1: the step itself;
//   - gap of g missing steps (g <= max_gap): g gap steps (value NaN), then the step;
//   - g > max_gap: a re-seed (the caller restarts the series' model), then the step;
//   - k <= last: rejected as late (k < last) or duplicate (k == last).
// With aggregation (count, sum, mean, max, last) records accumulate into the open bucket, which
// closes when a later bucket's record arrives or when the clock passes its end plus
// `allowed_lateness_ms` (AdvanceClock). Buckets nobody reported are zero for count and sum feeds
// (silence means nothing happened) and gaps for mean, max and last. Event-indexed series
// (interval 0) number records 0, 1, 2, ... in arrival order.
//
// Thread-safety: value type owned by the engine's owner thread.

#include <cmath>
#include <cstdint>
#include <limits>
#include <string>
#include <string_view>

#include "plimsoll/base/bytes.h"

#include "plimsoll/stream/rules.h"

namespace plimsoll::stream {


enum class StepKind : uint8_t { kValue, kGap, kReseed };

struct AlignedStep {
  StepKind kind;
  int64_t step;
  double value;  // NaN for gaps
};

enum class AlignOutcome : uint8_t { kAccepted, kLate, kDuplicate };

class StepAligner {
 public:
  static constexpr int64_t kNoStep = std::numeric_limits<int64_t>::min();

  // Offers one record; calls emit(const AlignedStep&) for every step it completes, in order.
  // REQUIRES: value finite.
  template <typename Emit>
  AlignOutcome Offer(const SeriesRules& rules, int64_t time_ms, double value, Emit&& emit) {
    if (rules.interval_ms <= 0) {
      last_step_ = last_step_ == kNoStep ? 0 : last_step_ + 1;
      emit(AlignedStep{StepKind::kValue, last_step_, value});
      return AlignOutcome::kAccepted;
    }
    const int64_t step = FloorDiv(time_ms, rules.interval_ms);
    if (rules.aggregate == AggregateKind::kNone) {
      if (last_step_ != kNoStep && step <= last_step_) return Reject(step);
      EmitThrough(rules, step, value, emit);
      return AlignOutcome::kAccepted;
    }
    if (open_step_ != kNoStep && step == open_step_) {
      Accumulate(value);
      return AlignOutcome::kAccepted;
    }
    if (open_step_ != kNoStep && step < open_step_) return AlignOutcome::kLate;
    if (open_step_ == kNoStep && last_step_ != kNoStep && step <= last_step_) return AlignOutcome::kLate;
    CloseBucket(rules, emit);
    open_step_ = step;
    count_ = 0;
    Accumulate(value);
    return AlignOutcome::kAccepted;
  }

  // Closes buckets whose end + allowed lateness is at or before `now_ms`, and for count/sum feeds
  // emits the zero buckets of a silent feed up to the last fully closed one.
  template <typename Emit>
  void AdvanceClock(const SeriesRules& rules, int64_t now_ms, Emit&& emit) {
    if (rules.interval_ms <= 0 || rules.aggregate == AggregateKind::kNone) return;
    // The newest step whose bucket may no longer receive records.
    const int64_t closed_through = FloorDiv(now_ms - rules.allowed_lateness_ms, rules.interval_ms) - 1;
    if (open_step_ != kNoStep && open_step_ <= closed_through) CloseBucket(rules, emit);
    if (last_step_ == kNoStep || !SilenceIsZero(rules.aggregate)) return;
    if (closed_through > last_step_ && closed_through - last_step_ <= rules.max_gap_steps) {
      while (last_step_ < closed_through) emit(AlignedStep{StepKind::kValue, ++last_step_, 0.0});
    }
  }

  int64_t last_step() const { return last_step_; }
  int64_t open_step() const { return open_step_; }

  // Checkpoint of the grid position and the open bucket, so a restart continues exactly.
  static constexpr size_t kEncodedBytes = 6 * 8;
  void EncodeTo(ByteWriter& w) const {
    for (int64_t v : {last_step_, open_step_, count_}) w.Put(v);
    for (double v : {sum_, max_, last_}) w.Put(v);
  }
  // Returns false (aligner unchanged) for malformed bytes.
  [[nodiscard]] bool Decode(std::string_view bytes) {
    ByteReader r(bytes);
    StepAligner a;
    if (!r.Get(a.last_step_) || !r.Get(a.open_step_) || !r.Get(a.count_) || !r.Get(a.sum_) || !r.Get(a.max_) ||
        !r.Get(a.last_) || r.remaining() != 0)
      return false;
    *this = a;
    return true;
  }

 private:
  static int64_t FloorDiv(int64_t a, int64_t b) {
    int64_t q = a / b;
    return (a % b != 0 && ((a < 0) != (b < 0))) ? q - 1 : q;
  }
  static bool SilenceIsZero(AggregateKind a) { return a == AggregateKind::kCount || a == AggregateKind::kSum; }

  AlignOutcome Reject(int64_t step) const {
    return step == last_step_ ? AlignOutcome::kDuplicate : AlignOutcome::kLate;
  }

  void Accumulate(double value) {
    if (count_ == 0) {
      sum_ = value;
      max_ = value;
    } else {
      sum_ += value;
      if (value > max_) max_ = value;
    }
    last_ = value;
    ++count_;
  }

  double BucketValue(AggregateKind a) const {
    switch (a) {
      case AggregateKind::kCount: return static_cast<double>(count_);
      case AggregateKind::kSum: return sum_;
      case AggregateKind::kMean: return sum_ / static_cast<double>(count_);
      case AggregateKind::kMax: return max_;
      case AggregateKind::kLast:
      case AggregateKind::kNone: return last_;
    }
    return last_;
  }

  template <typename Emit>
  void CloseBucket(const SeriesRules& rules, Emit& emit) {
    if (open_step_ == kNoStep) return;
    const int64_t step = open_step_;
    open_step_ = kNoStep;
    EmitThrough(rules, step, BucketValue(rules.aggregate), emit);
  }

  // Emits what lies between the last step and `step` (gap, zero buckets or re-seed), then `step`.
  template <typename Emit>
  void EmitThrough(const SeriesRules& rules, int64_t step, double value, Emit& emit) {
    if (last_step_ != kNoStep) {
      const int64_t missing = step - last_step_ - 1;
      if (missing > rules.max_gap_steps) {
        emit(AlignedStep{StepKind::kReseed, step, std::numeric_limits<double>::quiet_NaN()});
      } else if (SilenceIsZero(rules.aggregate)) {
        for (int64_t k = last_step_ + 1; k < step; ++k) emit(AlignedStep{StepKind::kValue, k, 0.0});
      } else {
        for (int64_t k = last_step_ + 1; k < step; ++k)
          emit(AlignedStep{StepKind::kGap, k, std::numeric_limits<double>::quiet_NaN()});
      }
    }
    last_step_ = step;
    emit(AlignedStep{StepKind::kValue, step, value});
  }

  int64_t last_step_ = kNoStep;  // newest step emitted
  int64_t open_step_ = kNoStep;  // aggregated feeds: bucket still accumulating
  int64_t count_ = 0;
  double sum_ = 0.0;
  double max_ = 0.0;
  double last_ = 0.0;
};

}  // namespace plimsoll::stream
