#include "plimsoll/refit/scheduler.h"

#include <iterator>

namespace plimsoll::refit {

std::string_view TriggerName(Trigger trigger) {
  switch (trigger) {
    case Trigger::kAlert: return "alert";
    case Trigger::kWarmup: return "warmup";
    case Trigger::kRequest: return "request";
    case Trigger::kProfileChange: return "profile_change";
    case Trigger::kNonPositive: return "non_positive";
    case Trigger::kCount: return "count";
    case Trigger::kAge: return "age";
  }
  return "unknown";
}

std::string_view OverflowPolicyName(OverflowPolicy policy) {
  switch (policy) {
    case OverflowPolicy::kDropLeastUrgent: return "drop-least-urgent";
  }
  return "unknown";
}

RefitTriggers::PerSeries& RefitTriggers::At(SeriesId series) {
  if (series >= series_.size()) series_.resize(static_cast<size_t>(series) + 1);
  return series_[series];
}

void RefitTriggers::ModelInstalled(SeriesId series, uint32_t profile, int64_t now_ms) {
  PerSeries& s = At(series);
  s = PerSeries{now_ms, 0, profile, false, false};
}

void RefitTriggers::Rearm(SeriesId series) {
  PerSeries& s = At(series);
  s.observed = 0;
  s.count_fired = false;
}

bool RefitTriggers::Observed(SeriesId series, uint32_t profile, int64_t n) {
  PerSeries& s = At(series);
  s.profile = profile;
  s.observed += n;
  if (s.model_ms == INT64_MIN || s.count_fired || profile >= rules_.size()) return false;
  const int64_t every = rules_[profile].every;
  if (every <= 0 || s.observed < every) return false;
  s.count_fired = true;
  return true;
}

std::vector<SeriesId> RefitTriggers::Aged(int64_t now_ms) {
  std::vector<SeriesId> out;
  for (SeriesId id = 0; id < series_.size(); ++id) {
    PerSeries& s = series_[id];
    if (s.model_ms == INT64_MIN || s.age_fired || s.profile >= rules_.size()) continue;
    const std::optional<int64_t>& max_age = rules_[s.profile].max_age_ms;
    if (!max_age || now_ms - s.model_ms < *max_age) continue;
    s.age_fired = true;
    out.push_back(id);
  }
  return out;
}

int64_t RefitTriggers::ModelTime(SeriesId series) const {
  return series < series_.size() ? series_[series].model_ms : INT64_MIN;
}

bool RefitQueue::Push(const RefitTask& task) {
  if (auto it = by_series_.find(task.series); it != by_series_.end()) {
    ++counters_.merged;
    const RefitTask& queued = order_.at(it->second);
    if (!(task.trigger == Trigger::kAlert && queued.trigger != Trigger::kAlert)) return true;
    order_.erase(it->second);
    it->second = KeyOf(task, seq_++);
    order_.emplace(it->second, task);
    return true;
  }
  const Key key = KeyOf(task, seq_++);
  if (order_.size() >= capacity_) {
    ++counters_.dropped;
    auto least = std::prev(order_.end());
    if (!(key < least->first)) return false;  // the newcomer is the least urgent
    by_series_.erase(least->second.series);
    order_.erase(least);
  }
  ++counters_.queued;
  order_.emplace(key, task);
  by_series_.emplace(task.series, key);
  return true;
}

std::optional<RefitTask> RefitQueue::Pop() {
  if (order_.empty()) return std::nullopt;
  RefitTask task = order_.begin()->second;
  order_.erase(order_.begin());
  by_series_.erase(task.series);
  return task;
}

size_t RefitQueue::Clear() {
  const size_t n = order_.size();
  order_.clear();
  by_series_.clear();
  return n;
}

}  // namespace plimsoll::refit
