// The demo's invented scenario: deterministic per seed, chunk-independent, the shapes its header
// promises, and the injected events at their times.
#include <catch2/catch.hpp>
#include <cmath>
#include <map>
#include <numeric>
#include <set>
#include <string>
#include <vector>

#include "cli/demo_scenario.h"

namespace plimsoll::cli {
namespace {

constexpr int64_t kMinute = 60'000;
constexpr int64_t kDay = 86'400'000;

ScenarioOptions Short(uint64_t seed) {
  ScenarioOptions o;
  o.history_days = 2;
  o.live_days = 1.0;
  o.seed = seed;
  return o;
}

std::vector<ScenarioRecord> All(const DemoScenario& s) {
  std::vector<ScenarioRecord> out;
  s.Generate(s.start_ms(), s.end_ms(), out);
  return out;
}

uint32_t IndexOf(const DemoScenario& s, const std::string& name) {
  for (uint32_t i = 0; i < s.series().size(); ++i)
    if (s.series()[i].name == name) return i;
  FAIL("no series " << name);
  return 0;
}

const InjectedEvent& EventOf(const DemoScenario& s, const std::string& kind) {
  for (const InjectedEvent& e : s.events())
    if (e.kind == kind) return e;
  FAIL("no event " << kind);
  return s.events().front();
}

bool SameRecords(const std::vector<ScenarioRecord>& a, const std::vector<ScenarioRecord>& b) {
  if (a.size() != b.size()) return false;
  for (size_t i = 0; i < a.size(); ++i)
    if (a[i].time_ms != b[i].time_ms || a[i].series != b[i].series || a[i].value != b[i].value) return false;
  return true;
}

TEST_CASE("the scenario is the same for a seed and different for another", "[demo]") {
  DemoScenario a(Short(7)), b(Short(7)), c(Short(8));
  std::vector<ScenarioRecord> ra = All(a), rb = All(b), rc = All(c);
  CHECK(SameRecords(ra, rb));
  CHECK_FALSE(SameRecords(ra, rc));
}

TEST_CASE("generating in chunks gives the records of one pass, in time order", "[demo]") {
  DemoScenario s(Short(3));
  std::vector<ScenarioRecord> whole = All(s), chunked;
  for (int64_t t = s.start_ms(); t < s.end_ms(); t += 37 * kMinute) s.Generate(t, t + 37 * kMinute, chunked);
  CHECK(SameRecords(whole, chunked));
  for (size_t i = 1; i < whole.size(); ++i) REQUIRE(whole[i - 1].time_ms <= whole[i].time_ms);
  CHECK(whole.front().time_ms >= s.start_ms());
  CHECK(whole.back().time_ms < s.end_ms());
}

TEST_CASE("several dozen series in three families with distinct names", "[demo]") {
  DemoScenario s(Short(1));
  std::map<FeedFamily, int> per_family;
  std::set<std::string> names;
  for (const ScenarioSeries& x : s.series()) {
    ++per_family[x.family];
    names.insert(x.name);
  }
  CHECK(s.series().size() >= 30);
  CHECK(names.size() == s.series().size());
  CHECK(per_family[FeedFamily::kQueue] >= 12);
  CHECK(per_family[FeedFamily::kTransactions] >= 4);
  CHECK(per_family[FeedFamily::kSensor] >= 4);
}

TEST_CASE("queues sit on the 15-minute grid with a daily and a weekly rhythm", "[demo]") {
  ScenarioOptions o;
  o.history_days = 7;  // Monday 2026-03-02 through Sunday
  o.live_days = 1.0;
  DemoScenario s(o);
  const uint32_t q = IndexOf(s, "queue.larkspur.bookings");
  std::vector<ScenarioRecord> recs = All(s);
  std::vector<double> by_day(8, 0.0);
  double night = 0, morning = 0;
  int count = 0;
  for (const ScenarioRecord& r : recs) {
    if (r.series != q) continue;
    ++count;
    REQUIRE(r.time_ms % (15 * kMinute) == 0);
    REQUIRE(r.value >= 0.0);
    REQUIRE(r.value == std::round(r.value));
    by_day[static_cast<size_t>((r.time_ms - s.start_ms()) / kDay)] += r.value;
    int64_t minute_of_day = (r.time_ms % kDay) / kMinute;
    if (minute_of_day >= 120 && minute_of_day < 240) night += r.value;
    if (minute_of_day >= 570 && minute_of_day < 690) morning += r.value;
  }
  CHECK(count == 8 * 96);  // no outage on this queue
  CHECK(morning > 5.0 * night);              // daily rhythm
  CHECK(by_day[0] > 1.5 * by_day[6]);        // Monday busier than Sunday: weekly rhythm
  CHECK(by_day[5] < 0.8 * by_day[2]);        // Saturday quieter than Wednesday
}

TEST_CASE("transactions are single records to be counted, busier at lunch than at night", "[demo]") {
  DemoScenario s(Short(1));
  const uint32_t tx = IndexOf(s, "tx.gullhaven.food");
  double lunch = 0, night = 0;
  for (const ScenarioRecord& r : All(s)) {
    if (r.series != tx) continue;
    REQUIRE(r.value == 1.0);
    int64_t minute_of_day = (r.time_ms % kDay) / kMinute;
    if (minute_of_day >= 12 * 60 && minute_of_day < 13 * 60) lunch += 1;
    if (minute_of_day >= 2 * 60 && minute_of_day < 3 * 60) night += 1;
  }
  CHECK(lunch > 10.0 * std::max(night, 1.0));
}

TEST_CASE("the level shift, the outage and the spikes happen in the live part at their times", "[demo]") {
  DemoScenario s(Short(5));
  const int64_t live = s.end_ms() - s.live_start_ms();
  std::vector<ScenarioRecord> recs = All(s);

  const InjectedEvent& shift = EventOf(s, "level shift");
  CHECK(shift.series == "sensor.gullhaven-coldroom-2.temp");
  CHECK(shift.start_ms == s.live_start_ms() + live * 4 / 10);
  const uint32_t cold = IndexOf(s, shift.series);
  double before = 0, after = 0;
  int nb = 0, na = 0;
  for (const ScenarioRecord& r : recs) {
    if (r.series != cold) continue;
    if (r.time_ms >= shift.start_ms - 60 * kMinute && r.time_ms < shift.start_ms) before += r.value, ++nb;
    if (r.time_ms >= shift.start_ms && r.time_ms < shift.start_ms + 60 * kMinute) after += r.value, ++na;
  }
  REQUIRE(nb == 60);
  REQUIRE(na == 60);
  CHECK(after / na - before / nb == Approx(4.5).margin(0.3));

  const InjectedEvent& outage = EventOf(s, "outage");
  CHECK(outage.start_ms == s.live_start_ms() + live / 2);
  CHECK(outage.end_ms - outage.start_ms == 45 * kMinute);
  const uint32_t kiosks = IndexOf(s, outage.series);
  int inside = 0, hour_after = 0;
  for (const ScenarioRecord& r : recs) {
    if (r.series != kiosks) continue;
    if (r.time_ms >= outage.start_ms && r.time_ms < outage.end_ms) ++inside;
    if (r.time_ms >= outage.end_ms && r.time_ms < outage.end_ms + 60 * kMinute) ++hour_after;
  }
  CHECK(inside == 0);
  CHECK(hour_after > 100);  // it resumes (midday rate ~20 a minute)

  int spikes = 0;
  for (const InjectedEvent& e : s.events()) {
    if (e.kind != "spike") continue;
    ++spikes;
    CHECK(e.start_ms >= s.live_start_ms());
    const uint32_t i = IndexOf(s, e.series);
    CHECK(s.Expected(i, e.start_ms) > s.Expected(i, e.start_ms - (e.end_ms - e.start_ms)) * 1.3);
  }
  CHECK(spikes >= 3);
}

TEST_CASE("a shorter live part moves the events with it", "[demo]") {
  ScenarioOptions o = Short(1);
  o.live_days = 0.25;
  DemoScenario s(o);
  for (const InjectedEvent& e : s.events()) {
    CHECK(e.start_ms >= s.live_start_ms());
    CHECK(e.start_ms < s.end_ms());
  }
  CHECK(EventOf(s, "outage").end_ms - EventOf(s, "outage").start_ms == 36 * kMinute);  // a tenth of 6 h
}

}  // namespace
}  // namespace plimsoll::cli
