#include "stream/alert_tracker.h"

#include <catch2/catch.hpp>
#include <string>
#include <vector>

namespace plimsoll::stream {
namespace {

// Feeds a pattern ('x' flagged, '.' in band) and returns where transitions happened, e.g. "R@2 C@7".
std::string Transitions(const std::string& pattern, const AlertRule& rule) {
  AlertTracker tracker;
  std::string out;
  for (size_t i = 0; i < pattern.size(); ++i) {
    AlertTransition t = tracker.Observe(pattern[i] == 'x', rule);
    if (t == AlertTransition::kNone) continue;
    if (!out.empty()) out += ' ';
    out += (t == AlertTransition::kRaised ? "R@" : "C@") + std::to_string(i);
  }
  return out;
}

}  // namespace

TEST_CASE("an alert needs breach_run flags in a row and clears after clear_run in-band points", "[stream]") {
  AlertRule rule{.breach_run = 3, .window = 3, .clear_run = 4};
  CHECK(Transitions("xx.xx.x", rule).empty());
  CHECK(Transitions("..xxx....", rule) == "R@4 C@8");
  // One in-band point during an alert resets the clear count.
  CHECK(Transitions("xxx...x....", rule) == "R@2 C@10");
}

TEST_CASE("k of n raises on scattered breaches", "[stream]") {
  AlertRule rule{.breach_run = 3, .window = 5, .clear_run = 2};
  CHECK(Transitions("x.x.x", rule) == "R@4");
  CHECK(Transitions("x...x.x", rule).empty());  // only 2 of the last 5 at every point
  CHECK(Transitions("x.x.x..x.x.x", rule) == "R@4 C@6 R@11");
}

TEST_CASE("a single flag raises when breach_run is one", "[stream]") {
  AlertRule rule{.breach_run = 1, .window = 1, .clear_run = 1};
  CHECK(Transitions(".x.x", rule) == "R@1 C@2 R@3");
}

}  // namespace plimsoll::stream
