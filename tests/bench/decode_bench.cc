// Record decoding throughput: the first step of the engine's hot path. Measures ns per record
// for ~60-byte JSON and CSV records decoded in place (as FileSource/StdinSource blocks allow),
// JSON with a copy into the decoder's padded buffer (as Kafka payloads need), and JSON with an
// ISO-8601 time string instead of an epoch number. Figures are thread CPU time per record (the
// machine is shared; wall time is printed too). Measures and prints; asserts nothing.

#include <time.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <string>
#include <vector>

#include "bench/bench.h"
#include "plimsoll/stream/decode.h"

namespace plimsoll::bench {
namespace {

using stream::DecodedRecord;
using stream::RecordDecoder;

// Records laid out back to back with newlines, as in a source's read buffer.
struct Block {
  std::string bytes;
  std::vector<std::string_view> records;
  double mean_bytes = 0;
};

Block MakeBlock(int count, bool csv, bool iso) {
  Block b;
  std::vector<std::pair<size_t, size_t>> spans;
  char buf[160];
  for (int i = 0; i < count; ++i) {
    const int series = (i * 7919) % 100'000;
    const long long t = 1'772'352'930'000LL + 900'000LL * (i / 100);
    const double value = 100.0 + (i % 977) * 0.25;
    int n;
    if (csv) {
      n = std::snprintf(buf, sizeof buf, "contact-queue-%05d,2026-03-01T%02d:%02d:30.250Z,%.2f", series, (i / 60) % 24,
                        i % 60, value);
    } else if (iso) {
      n = std::snprintf(buf, sizeof buf, R"({"series":"q-%05d","time":"2026-03-01T%02d:%02d:30Z","value":%.2f})",
                        series, (i / 60) % 24, i % 60, value);
    } else {
      n = std::snprintf(buf, sizeof buf, R"({"series":"queue-%05d","time":%lld,"value":%.2f})", series, t, value);
    }
    spans.emplace_back(b.bytes.size(), static_cast<size_t>(n));
    b.bytes.append(buf, static_cast<size_t>(n));
    b.bytes += '\n';
  }
  b.bytes.append(stream::kRecordPadding, ' ');
  size_t total = 0;
  for (auto [off, len] : spans) {
    b.records.emplace_back(b.bytes.data() + off, len);
    total += len;
  }
  b.mean_bytes = static_cast<double>(total) / count;
  return b;
}

// CPU time of this thread: on a shared machine, wall time also counts other processes' slices.
double ThreadCpuNanos() {
  timespec t{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &t);
  return static_cast<double>(t.tv_sec) * 1e9 + static_cast<double>(t.tv_nsec);
}

struct Timing {
  double cpu_ns = 1e300;   // best pass, thread CPU time per record
  double wall_ns = 1e300;  // best pass, wall time per record
};

Timing TimeDecode(const Block& b, bool padded, int rounds) {
  RecordDecoder decoder;
  DecodedRecord rec;
  Timing best;
  for (int r = 0; r < rounds; ++r) {
    double checksum = 0;
    size_t failures = 0;
    const auto start = std::chrono::steady_clock::now();
    const double cpu_start = ThreadCpuNanos();
    for (std::string_view payload : b.records) {
      Status s = padded ? decoder.DecodePadded({}, payload, -1, rec) : decoder.Decode({}, payload, -1, rec);
      failures += !s.ok();
      checksum += rec.value + static_cast<double>(rec.series.size());
    }
    const double cpu = ThreadCpuNanos() - cpu_start;
    const double wall = std::chrono::duration<double, std::nano>(std::chrono::steady_clock::now() - start).count();
    KeepAlive(checksum);
    if (failures != 0) std::fprintf(stderr, "decode bench: %zu records failed to decode\n", failures);
    const double n = static_cast<double>(b.records.size());
    best.cpu_ns = std::min(best.cpu_ns, cpu / n);
    best.wall_ns = std::min(best.wall_ns, wall / n);
  }
  return best;
}

BenchReport RunDecodeBench(const BenchArgs& args) {
  const int count = args.quick ? 20'000 : 1'000'000;
  const int rounds = args.quick ? 1 : 5;
  const Block json = MakeBlock(count, false, false);
  const Block json_iso = MakeBlock(count, false, true);
  const Block csv = MakeBlock(count, true, false);
  const Timing json_t = TimeDecode(json, true, rounds);
  const Timing json_copy_t = TimeDecode(json, false, rounds);
  const Timing json_iso_t = TimeDecode(json_iso, true, rounds);
  const Timing csv_t = TimeDecode(csv, true, rounds);
  BenchReport report;
  report.Add("records", static_cast<int64_t>(count));
  report.Add("json_record_bytes", json.mean_bytes);
  report.Add("json_ns_per_record", json_t.cpu_ns);
  report.Add("json_records_per_s", 1e9 / json_t.cpu_ns);
  report.Add("json_copy_ns_per_record", json_copy_t.cpu_ns);
  report.Add("json_iso_ns_per_record", json_iso_t.cpu_ns);
  report.Add("csv_record_bytes", csv.mean_bytes);
  report.Add("csv_ns_per_record", csv_t.cpu_ns);
  report.Add("csv_records_per_s", 1e9 / csv_t.cpu_ns);
  report.Add("json_wall_ns_per_record", json_t.wall_ns);
  report.Add("csv_wall_ns_per_record", csv_t.wall_ns);
  report.notes.push_back("best of " + std::to_string(rounds) + " passes, thread CPU time (wall time in *_wall_*); "
                         "one core; in-place decode unless 'copy'");
  return report;
}

PLIMSOLL_BENCH("decode", "record decoding: ns per ~60-byte JSON / CSV record", RunDecodeBench);

}  // namespace
}  // namespace plimsoll::bench
