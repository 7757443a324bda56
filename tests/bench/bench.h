#pragma once
// The plimsoll-bench harness. A benchmark registers a function that measures and returns a
// BenchReport; the harness prints it as one JSON object ({"bench": NAME, ...}) with --json, or as
// a readable table. Benchmarks measure and report; they never assert a time.

#include <cstdint>
#include <functional>
#include <string>
#include <utility>
#include <variant>
#include <vector>

namespace plimsoll::bench {

using BenchValue = std::variant<double, int64_t, std::string>;
using BenchFields = std::vector<std::pair<std::string, BenchValue>>;

struct BenchReport {
  BenchFields figures;            // top-level named figures, in print order
  std::string rows_key = "rows";  // JSON key of the table rows
  std::vector<BenchFields> rows;  // optional table, one entry per row
  std::vector<std::string> notes; // printed in table mode only (to stderr in --json mode)

  void Add(std::string key, BenchValue value) { figures.emplace_back(std::move(key), std::move(value)); }
};

struct BenchArgs {
  bool json = false;
  bool quick = false;  // smaller problem sizes, for smoke runs in CI
};

using BenchFn = std::function<BenchReport(const BenchArgs&)>;

// Registers a benchmark at static-initialisation time; returns true so it can seed a global.
bool RegisterBench(std::string name, std::string description, BenchFn fn);

// Stops the optimiser from discarding a computed value.
template <typename T>
inline void KeepAlive(T const& value) {
  asm volatile("" : : "r,m"(value) : "memory");
}

}  // namespace plimsoll::bench

#define PLIMSOLL_BENCH_CONCAT_(a, b) a##b
#define PLIMSOLL_BENCH_CONCAT(a, b) PLIMSOLL_BENCH_CONCAT_(a, b)
// PLIMSOLL_BENCH("update", "one-step update throughput", [](const BenchArgs& a) { ... });
#define PLIMSOLL_BENCH(name, description, fn) \
  static const bool PLIMSOLL_BENCH_CONCAT(plimsoll_bench_registered_, __LINE__) = \
      ::plimsoll::bench::RegisterBench(name, description, fn)
