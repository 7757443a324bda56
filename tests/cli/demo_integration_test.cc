// `plimsoll demo` end to end (the real binary: embedded broker, generator, daemon, SQLite): a short
// run exits 0, its summary names the level-shift series among the alerted ones, the store holds
// a state for every generated series, and a second run with the same seed flags the same points.
#include <sys/wait.h>

#include <catch2/catch.hpp>
#include <cstdio>
#include <filesystem>
#include <set>
#include <string>
#include <tuple>

#include "cli/demo_scenario.h"
#include "plimsoll/store/store.h"

namespace plimsoll {
namespace {

namespace fs = std::filesystem;

struct Outcome {
  int exit_code = -1;
  std::string out;
};

Outcome RunDemo(const std::string& dir, const std::string& duration = "0.5") {
  std::string command = std::string(PLIMSOLL_BINARY_DIR) + "/plimsoll demo --duration " + duration +
                        " --history-days 2 --speed 200000 --seed 11 --dir '" + dir + "' 2>" + dir + ".stderr";
  Outcome o;
  FILE* pipe = popen(command.c_str(), "r");
  REQUIRE(pipe != nullptr);
  char buf[4096];
  size_t n;
  while ((n = fread(buf, 1, sizeof buf, pipe)) > 0) o.out.append(buf, n);
  int status = pclose(pipe);
  o.exit_code = WIFEXITED(status) ? WEXITSTATUS(status) : -1;
  return o;
}

std::unique_ptr<store::Store> OpenRead(const std::string& path) {
  store::StoreOptions options;
  options.path = path;
  options.read_only = true;
  auto s = store::Store::Open(options);
  REQUIRE(s.ok());
  return std::move(s).value();
}

std::set<std::tuple<std::string, int64_t>> FlagSet(store::Store& db) {
  auto flags = db.RecentFlags("", 10'000'000);
  REQUIRE(flags.ok());
  std::set<std::tuple<std::string, int64_t>> out;
  for (const store::FlagRecord& f : *flags) out.insert({f.series, f.step});
  return out;
}

TEST_CASE("a short demo alerts on the level shift and stores every series, the same for a seed", "[cli][demo]") {
  const fs::path base = fs::temp_directory_path() / ("plimsoll-demo-test-" + std::to_string(getpid()));
  fs::remove_all(base);
  fs::create_directories(base);
  const std::string first = (base / "a").string(), second = (base / "b").string();

  Outcome a = RunDemo(first);
  INFO(a.out);
  REQUIRE(a.exit_code == 0);

  cli::ScenarioOptions options;
  options.history_days = 2;
  options.live_days = 0.5;
  options.seed = 11;
  cli::DemoScenario scenario(options);
  std::string shifted;
  for (const cli::InjectedEvent& e : scenario.events())
    if (e.kind == "level shift") shifted = e.series;
  REQUIRE(!shifted.empty());

  // The summary's alert list carries a RAISED line for the shifted series.
  const size_t alerts_at = a.out.find("Alerts (");
  REQUIRE(alerts_at != std::string::npos);
  const std::string alert_section = a.out.substr(alerts_at);
  CHECK(alert_section.find("RAISED  " + shifted) != std::string::npos);
  CHECK(a.out.find(first + "/demo.db") != std::string::npos);
  CHECK(a.out.find("plimsoll inspect --store") != std::string::npos);
  CHECK(a.out.find("certified safety instrumentation") != std::string::npos);

  std::set<std::tuple<std::string, int64_t>> flags_a;
  {
    auto db = OpenRead(first + "/demo.db");
    for (const cli::ScenarioSeries& s : scenario.series()) {
      auto stored = db->GetSeries(s.name);
      INFO(s.name);
      REQUIRE(stored.ok());
      CHECK(stored->state.has_value());
      CHECK(stored->model.has_value());  // every series finished its warm-up
    }
    auto alerts = db->RecentAlerts(shifted, 100);
    REQUIRE(alerts.ok());
    CHECK(!alerts->empty());
    flags_a = FlagSet(*db);
  }
  CHECK(!flags_a.empty());

  Outcome b = RunDemo(second);
  REQUIRE(b.exit_code == 0);
  auto db_b = OpenRead(second + "/demo.db");
  CHECK(FlagSet(*db_b) == flags_a);  // same seed, same flags in the same places
  fs::remove_all(base);
}

TEST_CASE("the demo refuses a non-positive duration naming the option", "[cli][demo]") {
  const fs::path dir = fs::temp_directory_path() / ("plimsoll-demo-bad-" + std::to_string(getpid()));
  Outcome o = RunDemo(dir.string(), "0");
  CHECK(o.exit_code == 2);
  fs::remove_all(dir);
  fs::remove(dir.string() + ".stderr");
}

}  // namespace
}  // namespace plimsoll
