#include "cli/watch_run_util.h"

#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <catch2/catch.hpp>

namespace plimsoll::watch_test {

pid_t StartWatch(const std::string& config) {
  const std::string binary = std::string(PLIMSOLL_BINARY_DIR) + "/plimsoll";
  pid_t pid = fork();
  if (pid == 0) {
    execl(binary.c_str(), binary.c_str(), "watch", "--config", config.c_str(), static_cast<char*>(nullptr));
    _exit(127);
  }
  return pid;
}

int WaitExit(pid_t pid) {
  int status = 0;
  waitpid(pid, &status, 0);
  return WIFEXITED(status) ? WEXITSTATUS(status) : -WTERMSIG(status);
}

std::unique_ptr<store::Store> OpenReadOnly(const std::string& db) {
  store::StoreOptions options;
  options.path = db;
  options.read_only = true;
  auto store = store::Store::Open(options);
  if (!store.ok()) return nullptr;
  return std::move(store).value();
}

Outcome ReadOutcome(const std::string& db) {
  auto store = OpenReadOnly(db);
  REQUIRE(store != nullptr);
  Outcome out;
  REQUIRE(store
              ->ForEachSeries([&](const store::StoredSeries& s) {
                if (s.state) out.states[s.series.name] = {s.state->step, s.state->encoded};
                return Status::Ok();
              })
              .ok());
  auto flags = store->RecentFlags("", 10'000'000);
  REQUIRE(flags.ok());
  for (const auto& f : *flags) out.flags.emplace_back(f.series, f.step, f.value, f.expected);
  auto alerts = store->RecentAlerts("", 10'000'000);
  REQUIRE(alerts.ok());
  for (const auto& a : *alerts) out.alerts.emplace_back(a.series, a.step, static_cast<int>(a.kind));
  std::sort(out.flags.begin(), out.flags.end());
  std::sort(out.alerts.begin(), out.alerts.end());
  out.positions = store->Positions();
  return out;
}

void CheckSame(const Outcome& got, const Outcome& reference) {
  REQUIRE(got.states.size() == reference.states.size());
  for (const auto& [name, state] : reference.states) {
    INFO("series " << name);
    REQUIRE(got.states.count(name) == 1);
    CHECK(got.states.at(name).first == state.first);
    CHECK(got.states.at(name).second == state.second);  // checkpoint bytes: bit-identical
  }
  CHECK(got.flags == reference.flags);
  CHECK(got.alerts == reference.alerts);
}

}  // namespace plimsoll::watch_test
