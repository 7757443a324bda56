#include "cli/demo_scenario.h"

#include <algorithm>
#include <cmath>
#include <numbers>

namespace plimsoll::cli {
namespace {

constexpr int64_t kMinuteMs = 60'000;
constexpr int64_t kQueueStepMs = 15 * kMinuteMs;
constexpr int64_t kDayMs = 86'400'000;

// splitmix64: a counter-based generator, so any draw depends only on its inputs.
uint64_t Mix(uint64_t x) {
  x += 0x9e3779b97f4a7c15ULL;
  x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9ULL;
  x = (x ^ (x >> 27)) * 0x94d049bb133111ebULL;
  return x ^ (x >> 31);
}

// Uniform in (0, 1) for draw `k` of (seed, series, time).
double Uniform(uint64_t seed, uint32_t series, int64_t time_ms, uint64_t k) {
  uint64_t h = Mix(seed ^ Mix((uint64_t{series} << 32) ^ k) ^ Mix(static_cast<uint64_t>(time_ms)));
  return (static_cast<double>(h >> 11) + 0.5) * 0x1.0p-53;
}

double Normal(uint64_t seed, uint32_t series, int64_t time_ms, uint64_t k) {
  double u1 = Uniform(seed, series, time_ms, 2 * k), u2 = Uniform(seed, series, time_ms, 2 * k + 1);
  return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * std::numbers::pi * u2);
}

// Poisson by inversion (means stay below ~100 here).
int Poisson(double mean, uint64_t seed, uint32_t series, int64_t time_ms) {
  double u = Uniform(seed, series, time_ms, 1000);
  double p = std::exp(-mean), cumulative = p;
  int n = 0;
  while (u > cumulative && n < 1000) {
    ++n;
    p *= mean / n;
    cumulative += p;
  }
  return n;
}

double HourOfDay(int64_t time_ms) { return static_cast<double>(((time_ms % kDayMs) + kDayMs) % kDayMs) / 3'600'000.0; }
int DayOfWeek(int64_t time_ms) {  // 0 = Monday (1970-01-01 was a Thursday)
  int64_t days = time_ms >= 0 ? time_ms / kDayMs : (time_ms - kDayMs + 1) / kDayMs;
  return static_cast<int>(((days + 3) % 7 + 7) % 7);
}
double Bump(double hour, double centre, double width) {
  double d = (hour - centre) / width;
  return std::exp(-0.5 * d * d);
}

// Contact-centre demand: quiet nights, a morning and an afternoon peak, fewer calls at weekends.
double QueueShape(int64_t time_ms) {
  static constexpr double kWeekday[7] = {1.15, 1.05, 1.0, 1.0, 0.95, 0.6, 0.45};
  double h = HourOfDay(time_ms);
  double day = 0.06 + 0.94 * std::max(Bump(h, 10.0, 1.8), 0.8 * Bump(h, 14.5, 2.2)) + 0.25 * Bump(h, 19.0, 1.5);
  return std::min(day, 1.0) * kWeekday[DayOfWeek(time_ms)];
}
// Market-hall trading: open 08:00-20:00, a lunch peak.
double TradeShape(int64_t time_ms) {
  double h = HourOfDay(time_ms);
  double open = 1.0 / (1.0 + std::exp(-(h - 8.0) * 3.0)) / (1.0 + std::exp((h - 20.0) * 3.0));
  return 0.03 + open * (0.55 + 0.45 * Bump(h, 12.5, 1.5));
}
double DailyWave(int64_t time_ms) { return std::sin(2.0 * std::numbers::pi * (HourOfDay(time_ms) - 6.0) / 24.0); }

int64_t FloorTo(int64_t t, int64_t step) { return t - ((t % step) + step) % step; }
int64_t GridOf(FeedFamily f) { return f == FeedFamily::kQueue ? kQueueStepMs : kMinuteMs; }

}  // namespace

DemoScenario::DemoScenario(const ScenarioOptions& options) : options_(options) {
  live_start_ms_ = options.start_ms + options.history_days * kDayMs;
  end_ms_ = live_start_ms_ + static_cast<int64_t>(std::llround(options.live_days * kDayMs));
  auto add = [&](std::string name, FeedFamily family, double level) {
    series_.push_back({std::move(name), family, level});
  };
  // Larkspur Ferries (fictional) booking lines and Corvale City Utilities (fictional) helpdesk.
  const char* ferry[] = {"bookings", "changes", "freight", "groups", "accessibility", "lost-property",
                         "vehicle-deck", "season-tickets"};
  const char* utility[] = {"billing", "outages", "new-connections", "meter-reads", "payment-plans",
                           "water-quality", "streetlights", "bins-recycling", "parking-permits", "general"};
  int i = 0;
  for (const char* q : ferry) add(std::string("queue.larkspur.") + q, FeedFamily::kQueue, 90.0 - 9.0 * i++);
  i = 0;
  for (const char* q : utility) add(std::string("queue.corvale.") + q, FeedFamily::kQueue, 110.0 - 8.0 * i++);
  // Gullhaven Market Hall (fictional): card transactions, counted per minute.
  const char* stalls[] = {"food", "kiosks", "bakery", "fishmonger", "flowers", "cafe", "bookstall", "parking"};
  i = 0;
  for (const char* s : stalls) add(std::string("tx.gullhaven.") + s, FeedFamily::kTransactions, 30.0 - 3.0 * i++);
  for (int p = 1; p <= 5; ++p)
    add("sensor.corvale-pump-" + std::to_string(p) + ".pressure", FeedFamily::kSensor, 3.6 + 0.2 * p);  // bar
  for (int c = 1; c <= 5; ++c)
    add("sensor.gullhaven-coldroom-" + std::to_string(c) + ".temp", FeedFamily::kSensor, 2.5 + 0.3 * c);  // deg C

  auto find = [&](std::string_view name) {
    for (uint32_t s = 0; s < series_.size(); ++s)
      if (series_[s].name == name) return s;
    return uint32_t{0};
  };
  const int64_t live = end_ms_ - live_start_ms_;
  auto at = [&](std::string_view name, double fraction) {
    int64_t t = live_start_ms_ + static_cast<int64_t>(fraction * static_cast<double>(live));
    return FloorTo(t, GridOf(series_[find(name)].family));
  };
  auto spike = [&](std::string name, double fraction) {
    int64_t t = at(name, fraction);
    events_.push_back({name, "spike", t, t + GridOf(series_[find(name)].family)});
  };
  spike("queue.larkspur.bookings", 0.20);
  spike("sensor.corvale-pump-3.pressure", 0.30);
  spike("tx.gullhaven.food", 0.55);
  spike("queue.corvale.billing", 0.75);
  spike("sensor.gullhaven-coldroom-4.temp", 0.85);
  events_.push_back({"sensor.gullhaven-coldroom-2.temp", "level shift", at("sensor.gullhaven-coldroom-2.temp", 0.40),
                     end_ms_});
  const int64_t outage_start = at("tx.gullhaven.kiosks", 0.50);
  const int64_t outage_ms = std::max<int64_t>(5 * kMinuteMs, std::min<int64_t>(45 * kMinuteMs, FloorTo(live / 10, kMinuteMs)));
  events_.push_back({"tx.gullhaven.kiosks", "outage", outage_start, outage_start + outage_ms});

  events_by_series_.resize(series_.size());
  for (size_t e = 0; e < events_.size(); ++e) events_by_series_[find(events_[e].series)].push_back(e);
}

bool DemoScenario::Silent(uint32_t series, int64_t time_ms) const {
  for (size_t e : events_by_series_[series])
    if (events_[e].kind == "outage" && time_ms >= events_[e].start_ms && time_ms < events_[e].end_ms) return true;
  return false;
}

double DemoScenario::SpikeFactor(uint32_t series, int64_t time_ms) const {
  for (size_t e : events_by_series_[series])
    if (events_[e].kind == "spike" && time_ms >= events_[e].start_ms && time_ms < events_[e].end_ms) return 1.0;
  return 0.0;
}

double DemoScenario::Expected(uint32_t series, int64_t time_ms) const {
  const ScenarioSeries& s = series_[series];
  if (Silent(series, time_ms)) return 0.0;
  const bool spike = SpikeFactor(series, time_ms) > 0.0;
  double shift = 0.0;
  for (size_t e : events_by_series_[series])
    if (events_[e].kind == "level shift" && time_ms >= events_[e].start_ms) shift = 4.5;  // deg C: a failing compressor
  switch (s.family) {
    case FeedFamily::kQueue: {
      double mu = s.level * QueueShape(time_ms);
      return spike ? mu + std::max(40.0, 2.0 * mu) : mu;
    }
    case FeedFamily::kTransactions: {
      double mu = s.level * TradeShape(time_ms);
      return spike ? 5.0 * mu + 20.0 : mu;
    }
    case FeedFamily::kSensor: {
      bool pump = s.name.find("pump") != std::string::npos;
      double v = pump ? s.level - 0.25 * DailyWave(time_ms) : s.level + 0.3 * DailyWave(time_ms);
      if (spike) v += pump ? 1.5 : 3.0;
      return v + shift;
    }
  }
  return 0.0;
}

void DemoScenario::Generate(int64_t from_ms, int64_t to_ms, std::vector<ScenarioRecord>& out) const {
  from_ms = std::max(from_ms, options_.start_ms);
  to_ms = std::min(to_ms, end_ms_);
  const size_t first = out.size();
  for (uint32_t s = 0; s < series_.size(); ++s) {
    const FeedFamily family = series_[s].family;
    const int64_t grid = GridOf(family);
    for (int64_t t = FloorTo(from_ms + grid - 1, grid); t < to_ms; t += grid) {
      if (Silent(s, t)) continue;
      const double mu = Expected(s, t);
      switch (family) {
        case FeedFamily::kQueue: {
          double v = std::round(mu + std::sqrt(mu) * Normal(options_.seed, s, t, 0));
          out.push_back({t, s, std::max(0.0, v)});
          break;
        }
        case FeedFamily::kTransactions: {
          const int n = Poisson(mu, options_.seed, s, t);
          for (int k = 0; k < n; ++k) {
            int64_t at = t + static_cast<int64_t>(Uniform(options_.seed, s, t, 2000 + k) * (kMinuteMs - 1));
            out.push_back({at, s, 1.0});
          }
          break;
        }
        case FeedFamily::kSensor: {
          double sd = series_[s].name.find("pump") != std::string::npos ? 0.03 : 0.08;
          out.push_back({t, s, std::round((mu + sd * Normal(options_.seed, s, t, 0)) * 1000.0) / 1000.0});
          break;
        }
      }
    }
  }
  std::stable_sort(out.begin() + static_cast<std::ptrdiff_t>(first), out.end(),
                   [](const ScenarioRecord& a, const ScenarioRecord& b) {
                     return a.time_ms != b.time_ms ? a.time_ms < b.time_ms : a.series < b.series;
                   });
}

std::string DemoProfilesToml() {
  return R"toml([[profile]]
match = "queue.*"
interval = "15m"
period = 96
forms = ["ETS(A,N,A)"]
warmup = 192
history = 672
max_gap = "1d"

[[profile]]
match = "tx.*"
interval = "1m"
aggregate = "count"
forms = ["ETS(A,N,N)"]
warmup = 2880
history = 2880
max_gap = "1d"

[[profile]]
match = "sensor.*"
interval = "1m"
forms = ["ETS(A,N,N)", "ETS(A,Ad,N)"]
warmup = 240
history = 1440
max_gap = "1d"
)toml";
}

}  // namespace plimsoll::cli
