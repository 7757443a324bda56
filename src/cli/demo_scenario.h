#pragma once
// The invented scenario `plimsoll demo` publishes: a fictional ferry operator's booking lines and
// a fictional city utility's helpdesk (calls per 15-minute interval, daily and weekly rhythm),
// card transactions of a fictional market hall (one record per transaction, counted per minute),
// and plant sensors (pump pressure, cold-room temperature, one reading a minute). Spikes, one
// level shift and one outage are injected at times fixed by the options.
//
// Every value is a pure function of (seed, series, time): any time range can be generated in any
// order, in chunks, with identical results.
//
// Thread-safety: a DemoScenario is immutable after construction; Generate is const.

#include <cstdint>
#include <string>
#include <vector>

namespace plimsoll::cli {

enum class FeedFamily { kQueue, kTransactions, kSensor };

struct ScenarioOptions {
  int64_t start_ms = 1772409600000;  // 2026-03-02T00:00Z (a Monday): first simulated instant
  int history_days = 3;              // history published first, unpaced (warm-up), whole days
  double live_days = 1.0;            // simulated days after the history; injected events fall here
  uint64_t seed = 1;
};

struct ScenarioSeries {
  std::string name;
  FeedFamily family;
  double level;  // queues: calls per interval at the daily peak; transactions: per minute at peak;
                 // sensors: the normal reading
};

// One injected event. kind is "spike", "level shift" or "outage"; [start_ms, end_ms) is when it
// acts (a level shift lasts to the end of the scenario, a spike is one observation).
struct InjectedEvent {
  std::string series;
  std::string kind;
  int64_t start_ms;
  int64_t end_ms;
};

struct ScenarioRecord {
  int64_t time_ms;
  uint32_t series;  // index into DemoScenario::series()
  double value;
};

class DemoScenario {
 public:
  // REQUIRES: history_days >= 0, live_days > 0 (checked by the demo verb).
  explicit DemoScenario(const ScenarioOptions& options);

  const std::vector<ScenarioSeries>& series() const { return series_; }
  const std::vector<InjectedEvent>& events() const { return events_; }
  int64_t start_ms() const { return options_.start_ms; }
  int64_t live_start_ms() const { return live_start_ms_; }
  int64_t end_ms() const { return end_ms_; }

  // Appends every record with from_ms <= time < to_ms (clamped to the scenario), ordered by time
  // and, at equal times, by series index. Queues emit on the 15-minute grid, sensors on the minute,
  // transactions at their own instants within each minute (value 1, to be counted).
  void Generate(int64_t from_ms, int64_t to_ms, std::vector<ScenarioRecord>& out) const;

  // The expected (noise-free) value of a grid series at `time_ms` including injected events; for
  // transactions the expected count in the minute starting at time_ms. For tests and the docs.
  double Expected(uint32_t series, int64_t time_ms) const;

 private:
  bool Silent(uint32_t series, int64_t time_ms) const;
  double SpikeFactor(uint32_t series, int64_t time_ms) const;

  ScenarioOptions options_;
  std::vector<ScenarioSeries> series_;
  std::vector<InjectedEvent> events_;
  std::vector<std::vector<size_t>> events_by_series_;
  int64_t live_start_ms_;
  int64_t end_ms_;
};

// Profiles the demo gives each family (TOML [[profile]] tables), shared by the verb and the tests.
// Queues: 15m grid, period 96; transactions: 1m count; sensors: 1m grid.
std::string DemoProfilesToml();

}  // namespace plimsoll::cli
