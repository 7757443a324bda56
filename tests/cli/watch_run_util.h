#pragma once
// Helpers shared by the tests that run the real `plimsoll watch` binary and compare what it left
// in its SQLite file.

#include <sys/types.h>

#include <cstdint>
#include <map>
#include <memory>
#include <string>
#include <tuple>
#include <utility>
#include <vector>

#include "plimsoll/store/store.h"

namespace plimsoll::watch_test {

// Starts `PLIMSOLL_BINARY_DIR/plimsoll watch --config CONFIG` as a child process.
pid_t StartWatch(const std::string& config);

// Waits for the child: its exit code, or minus the signal that ended it.
int WaitExit(pid_t pid);

// What a run left in its store, in a comparable form.
struct Outcome {
  std::map<std::string, std::pair<int64_t, std::string>> states;  // series -> (step, checkpoint bytes)
  std::vector<std::tuple<std::string, int64_t, double, double>> flags;  // sorted (series, step, value, expected)
  std::vector<std::tuple<std::string, int64_t, int>> alerts;           // sorted (series, step, kind)
  std::vector<store::PositionRecord> positions;
};

// Null when the file cannot be opened (yet).
std::unique_ptr<store::Store> OpenReadOnly(const std::string& db);

// REQUIREs that the store opens and reads.
Outcome ReadOutcome(const std::string& db);

// Checks that `got` has the reference's series with bit-identical checkpoints and steps, and
// the same flags and alerts (positions are compared by the callers that expect them equal).
void CheckSame(const Outcome& got, const Outcome& reference);

}  // namespace plimsoll::watch_test
