// Baseline benchmark of the harness itself: JSON writer throughput. Keeps `plimsoll-bench list`
// non-empty before the engine benchmarks exist, and measures something the HTTP and sink
// paths lean on.
#include <chrono>

#include "bench/bench.h"
#include "plimsoll/base/json_writer.h"

namespace plimsoll::bench {
namespace {

BenchReport RunJsonWriterBench(const BenchArgs& args) {
  const int64_t records = args.quick ? 100'000 : 2'000'000;
  auto start = std::chrono::steady_clock::now();
  size_t bytes = 0;
  for (int64_t i = 0; i < records; ++i) {
    JsonWriter w;
    w.BeginObject().Field("series", "queue-7").Field("step", i).Field("value", 12.5 + static_cast<double>(i % 97));
    w.EndObject();
    bytes += w.str().size();
    KeepAlive(w.str().data());
  }
  double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  BenchReport report;
  report.Add("records", records);
  report.Add("records_per_s", static_cast<double>(records) / seconds);
  report.Add("mb_per_s", static_cast<double>(bytes) / seconds / 1e6);
  return report;
}

PLIMSOLL_BENCH("json", "JsonWriter: small event objects per second", RunJsonWriterBench);

}  // namespace
}  // namespace plimsoll::bench
