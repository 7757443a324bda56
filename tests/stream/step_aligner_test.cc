#include "stream/step_aligner.h"

#include <catch2/catch.hpp>
#include <cmath>
#include <string>
#include <vector>

namespace plimsoll::stream {
namespace {

constexpr int64_t kMinute = 60'000;

SeriesRules Grid(int64_t interval_ms, AggregateKind aggregate = AggregateKind::kNone, int64_t max_gap_steps = 96,
                 int64_t allowed_lateness_ms = 0) {
  SeriesRules rules;
  rules.interval_ms = interval_ms;
  rules.aggregate = aggregate;
  rules.max_gap_steps = max_gap_steps;
  rules.allowed_lateness_ms = allowed_lateness_ms;
  return rules;
}

struct Recorder {
  std::vector<AlignedStep> steps;
  void operator()(const AlignedStep& s) { steps.push_back(s); }
  // "v3=5 g4 r9" : value, gap, re-seed
  std::string Text() const {
    std::string out;
    for (const auto& s : steps) {
      if (!out.empty()) out += ' ';
      switch (s.kind) {
        case StepKind::kValue: {
          char buf[64];
          std::snprintf(buf, sizeof(buf), "v%lld=%g", static_cast<long long>(s.step), s.value);
          out += buf;
          break;
        }
        case StepKind::kGap: out += "g" + std::to_string(s.step); break;
        case StepKind::kReseed: out += "r" + std::to_string(s.step); break;
      }
    }
    return out;
  }
};

}  // namespace

TEST_CASE("consecutive intervals become consecutive steps", "[stream]") {
  SeriesRules rules = Grid(15 * kMinute);
  StepAligner aligner;
  Recorder rec;
  CHECK(aligner.Offer(rules, 0, 1.0, rec) == AlignOutcome::kAccepted);
  CHECK(aligner.Offer(rules, 15 * kMinute + 10, 2.0, rec) == AlignOutcome::kAccepted);
  CHECK(rec.Text() == "v0=1 v1=2");
}

TEST_CASE("a gap yields prediction-only steps and a long silence re-seeds", "[stream]") {
  SeriesRules rules = Grid(kMinute, AggregateKind::kNone, 3);
  StepAligner aligner;
  Recorder rec;
  CHECK(aligner.Offer(rules, 0, 1.0, rec) == AlignOutcome::kAccepted);
  CHECK(aligner.Offer(rules, 3 * kMinute, 2.0, rec) == AlignOutcome::kAccepted);
  CHECK(aligner.Offer(rules, 8 * kMinute, 3.0, rec) == AlignOutcome::kAccepted);
  CHECK(rec.Text() == "v0=1 g1 g2 v3=2 r8 v8=3");
}

TEST_CASE("late and duplicate steps are rejected", "[stream]") {
  SeriesRules rules = Grid(kMinute);
  StepAligner aligner;
  Recorder rec;
  REQUIRE(aligner.Offer(rules, 5 * kMinute, 1.0, rec) == AlignOutcome::kAccepted);
  CHECK(aligner.Offer(rules, 5 * kMinute + 1, 1.0, rec) == AlignOutcome::kDuplicate);
  CHECK(aligner.Offer(rules, 4 * kMinute, 1.0, rec) == AlignOutcome::kLate);
  CHECK(rec.Text() == "v5=1");
}

TEST_CASE("event-indexed series number records in arrival order", "[stream]") {
  SeriesRules rules = Grid(0);
  StepAligner aligner;
  Recorder rec;
  for (double v : {4.0, 5.0, 6.0}) CHECK(aligner.Offer(rules, 0, v, rec) == AlignOutcome::kAccepted);
  CHECK(rec.Text() == "v0=4 v1=5 v2=6");
}

TEST_CASE("aggregated buckets close when a later bucket's record arrives", "[stream]") {
  StepAligner mean_aligner;
  Recorder rec;
  SeriesRules mean = Grid(kMinute, AggregateKind::kMean);
  for (double v : {1.0, 2.0, 6.0}) REQUIRE(mean_aligner.Offer(mean, 10, v, rec) == AlignOutcome::kAccepted);
  CHECK(rec.steps.empty());
  REQUIRE(mean_aligner.Offer(mean, 2 * kMinute, 7.0, rec) == AlignOutcome::kAccepted);
  CHECK(rec.Text() == "v0=3");  // bucket 1 is known missing only when bucket 2 closes
  CHECK(mean_aligner.Offer(mean, 20, 1.0, rec) == AlignOutcome::kLate);

  for (auto [aggregate, expected] : {std::pair{AggregateKind::kCount, "v0=3"}, std::pair{AggregateKind::kSum, "v0=9"},
                                     std::pair{AggregateKind::kMax, "v0=6"}, std::pair{AggregateKind::kLast, "v0=6"}}) {
    StepAligner aligner;
    Recorder r;
    SeriesRules rules = Grid(kMinute, aggregate);
    for (double v : {1.0, 2.0, 6.0}) REQUIRE(aligner.Offer(rules, 10, v, r) == AlignOutcome::kAccepted);
    aligner.AdvanceClock(rules, kMinute, r);
    CHECK(r.Text() == expected);
  }
}

TEST_CASE("a silent count feed yields zero-count steps as the clock passes", "[stream]") {
  SeriesRules rules = Grid(kMinute, AggregateKind::kCount, 96, 5'000);
  StepAligner aligner;
  Recorder rec;
  REQUIRE(aligner.Offer(rules, 1'000, 1.0, rec) == AlignOutcome::kAccepted);
  REQUIRE(aligner.Offer(rules, 2'000, 1.0, rec) == AlignOutcome::kAccepted);
  aligner.AdvanceClock(rules, kMinute + 4'999, rec);  // still within the lateness allowance
  CHECK(rec.steps.empty());
  aligner.AdvanceClock(rules, kMinute + 5'000, rec);
  CHECK(rec.Text() == "v0=2");
  aligner.AdvanceClock(rules, 4 * kMinute + 5'000, rec);
  CHECK(rec.Text() == "v0=2 v1=0 v2=0 v3=0");
  // A record for a bucket the clock already closed is late.
  CHECK(aligner.Offer(rules, 3 * kMinute + 1, 1.0, rec) == AlignOutcome::kLate);
  // A record after silence fills the zero buckets between.
  REQUIRE(aligner.Offer(rules, 6 * kMinute, 1.0, rec) == AlignOutcome::kAccepted);
  aligner.AdvanceClock(rules, 7 * kMinute + 5'000, rec);
  CHECK(rec.Text() == "v0=2 v1=0 v2=0 v3=0 v4=0 v5=0 v6=1");
}

TEST_CASE("negative epoch times fall on the grid by floor division", "[stream]") {
  SeriesRules rules = Grid(kMinute);
  StepAligner aligner;
  Recorder rec;
  REQUIRE(aligner.Offer(rules, -1, 1.0, rec) == AlignOutcome::kAccepted);
  CHECK(aligner.last_step() == -1);
}

}  // namespace plimsoll::stream
