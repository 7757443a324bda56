#pragma once
// Refit scheduling, without threads: which series need a refit (RefitTriggers) and in which order
// the workers get them (RefitQueue). The refit service drives both from the daemon's owner thread
// at each group commit; unit tests drive them with a ManualClock's readings.
//
// Thread-safety: none; one thread (the owner) uses an instance.

#include <cstddef>
#include <cstdint>
#include <map>
#include <optional>
#include <string_view>
#include <tuple>
#include <unordered_map>
#include <vector>

#include "plimsoll/stream/engine.h"

namespace plimsoll::refit {

using stream::SeriesId;

// Why a refit was queued. Never renumber: the name is stored in events. Alerts sort first in the
// queue; every other trigger sorts by model age (no model yet = oldest).
enum class Trigger : uint8_t {
  kAlert = 0,          // an alert was raised: the model does not follow the series any more
  kWarmup = 1,         // warm-up complete: the series' first fit
  kRequest = 2,        // explicit request (`plimsoll refit`)
  kProfileChange = 3,  // the profile matching the series differs from the stored one
  kNonPositive = 4,    // a non-positive value met a multiplicative form: additive forms only
  kCount = 5,          // `refit_every` new observations since the model was chosen
  kAge = 6,            // the model is older than `refit_max_age`
};
// "alert", "warmup", "request", "profile_change", "non_positive", "count", "age".
std::string_view TriggerName(Trigger trigger);

// A profile's refit triggers (config: [[profile]] refit_every, refit_max_age, refit_on_alert).
struct TriggerRules {
  int64_t every = 0;                  // observations since the model was chosen; 0: never by count
  std::optional<int64_t> max_age_ms;  // model age (ms of wall time); nullopt: never by age
  bool on_alert = true;               // a raised alert queues a refit
};

// Per-series trigger state. Owner thread only.
class RefitTriggers {
 public:
  // `rules[i]` applies to series whose engine profile index is i.
  explicit RefitTriggers(std::vector<TriggerRules> rules) : rules_(std::move(rules)) {}

  // A model was put in force for `series` at `now_ms` (resets its count and age).
  void ModelInstalled(SeriesId series, uint32_t profile, int64_t now_ms);
  // A refit of `series` failed: its count trigger starts over (the age trigger waits for the
  // next model, so a failing fit is not retried every age scan).
  void Rearm(SeriesId series);
  // `n` new observations reached `series`; returns true when its count trigger fires now.
  bool Observed(SeriesId series, uint32_t profile, int64_t n);
  // Whether an alert raised on a series of `profile` queues a refit.
  bool OnAlert(uint32_t profile) const { return profile < rules_.size() && rules_[profile].on_alert; }
  // Series whose model is older than their profile's max age at `now_ms`, each at most once
  // until its next ModelInstalled. O(series).
  std::vector<SeriesId> Aged(int64_t now_ms);
  // When the series' model was chosen (ms); INT64_MIN when it has none.
  int64_t ModelTime(SeriesId series) const;

 private:
  struct PerSeries {
    int64_t model_ms = INT64_MIN;
    int64_t observed = 0;  // since the model was chosen
    uint32_t profile = 0;
    bool count_fired = false;
    bool age_fired = false;
  };
  PerSeries& At(SeriesId series);

  std::vector<TriggerRules> rules_;
  std::vector<PerSeries> series_;
};

// Never renumber: logged and documented. What a full queue does with one more task.
enum class OverflowPolicy : uint8_t {
  // Drop the task of least priority (the incoming one or the queued one with the newest model,
  // never an alert while a non-alert task is queued) and count it. Dropped triggers fire again:
  // counts and ages keep growing, alerts re-raise.
  kDropLeastUrgent = 0,
};
std::string_view OverflowPolicyName(OverflowPolicy policy);  // "drop-least-urgent"

inline constexpr int64_t kSnapshotAtDispatch = INT64_MIN;

struct RefitTask {
  SeriesId series;
  Trigger trigger;
  int64_t model_ms;  // age key: when the series' model was chosen (INT64_MIN: none)
  // The fit sees the series' history through this step: the step that fired the trigger (alert,
  // count), so the state after the catch-up does not depend on when the fit ran; or
  // kSnapshotAtDispatch for the series' last step when a worker takes it (age, request, ...).
  int64_t snapshot_step = kSnapshotAtDispatch;
};

struct QueueCounters {
  uint64_t queued = 0;     // tasks accepted
  uint64_t merged = 0;     // a task for a series already queued (the more urgent trigger kept)
  uint64_t dropped = 0;    // tasks lost to the overflow policy
};

// Bounded priority queue of refit tasks, at most one per series. Owner thread only.
class RefitQueue {
 public:
  // REQUIRES: capacity >= 1.
  explicit RefitQueue(size_t capacity, OverflowPolicy policy = OverflowPolicy::kDropLeastUrgent)
      : capacity_(capacity), policy_(policy) {}

  // Queues `task`; a task for a series already queued merges into it (more urgent trigger wins).
  // Returns false when the task itself was dropped (overflow).
  bool Push(const RefitTask& task);
  // Most urgent task: alerts first, then the oldest model, then first queued.
  std::optional<RefitTask> Pop();
  // Removes every queued task (shutdown); returns how many.
  size_t Clear();
  bool Contains(SeriesId series) const { return by_series_.contains(series); }
  size_t size() const { return order_.size(); }
  const QueueCounters& counters() const { return counters_; }

 private:
  // (class: 0 alert / 1 other, model time, sequence) orders by urgency.
  using Key = std::tuple<int, int64_t, uint64_t>;
  static Key KeyOf(const RefitTask& task, uint64_t seq) {
    return {task.trigger == Trigger::kAlert ? 0 : 1, task.model_ms, seq};
  }

  size_t capacity_;
  OverflowPolicy policy_;
  uint64_t seq_ = 0;
  std::map<Key, RefitTask> order_;
  std::unordered_map<SeriesId, Key> by_series_;
  QueueCounters counters_;
};

}  // namespace plimsoll::refit
