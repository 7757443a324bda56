// Engine path throughput and memory: 60-byte JSON records in memory, decoded, routed to their
// series by name, aligned on a one-minute grid, one model step each, banded and flagged; then the
// same records through the durable path (stream::Daemon with the write-behind SQLite group
// commit, WAL, synchronous NORMAL, temp file) in the same run. Measures and prints; asserts
// nothing.
//
// Workload: `series` series (100k; --quick 10k), period m = 24, forms mixed by series index:
// ETS(A,Ad,A), ETS(A,N,A), ETS(M,Ad,M) (by (i % 97) % 3). Data: level + 24-step season + normal noise (fixed
// seed); series order shuffled within each round so the per-series memory is touched in no
// friendly order. Fitting is OUT of the measurement: the ModelChooser returns fixed parameters
// and the data's own level and season as the initial state, and every series is warmed up (two
// records each, warmup = 2) before the clock starts.
//
// JSON keys:
//   engine_records_per_s      records per wall second through RecordDecoder::DecodePadded +
//                             Engine::ObserveBatch in blocks of 4096 (the daemon's poll size)
//                             (+ Engine::TakeBatch every commit_records records)
//   engine_records_per_cpu_s  the same per thread-CPU second (steadier on a shared machine)
//   engine_ns_per_record      thread-CPU nanoseconds per record
//   durable_records_per_s     records per wall second through Daemon::Run (poll, decode, engine,
//                             ToStoreBatch, CommitWriter + Store::Commit, history compaction on
//                             other threads), final commit included, and until a compaction the
//                             records made due is applied (one falls midway, see preroll_records)
//   durable_records_per_cpu_s records per process-CPU second (all threads) in that run
//   durable_ratio             durable_records_per_s / engine_records_per_s
//   durable_ratio_cpu         durable_records_per_cpu_s / engine_records_per_cpu_s
//   durable_commits           group commits in the durable run
//   durable_owner_cpu_s       CPU seconds of the thread running Daemon::Run (the owner) in that run
//   durable_other_cpu_s       CPU seconds of every other thread (commit writer, compaction) in that run
//   durable_states_written    series states the store wrote at checkpoints (warm-up included)
//   durable_compactions       history log compactions applied in the timed window
//   durable_compaction_s      wall seconds the writer spent applying them (it commits nothing meanwhile;
//                             the reading and regrouping runs on the compaction thread)
//   durable_commit_max_ms     the longest group commit (warm-up included)
//   bytes_per_series          Engine::ResidentBytes() / series after warm-up (structures the
//                             engine keeps per series; history lives in SQLite)
//   rss_bytes_per_series      growth of the process RSS while the engine created and warmed up
//                             the series, divided by the series (allocator overhead included)
//   flags_per_record          flags raised / records (a sanity figure: ~1% at a 99% band)
//   series, records, record_bytes_mean, period
//   preroll_records           untimed records after the warm-up (through both paths): one history
//                             compaction runs in them and the log is left at half the threshold,
//                             so the timed window holds the next compaction cycle midway (0 with
//                             --quick: no compaction)

#include <stdlib.h>
#include <time.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <numeric>
#include <random>
#include <stdexcept>
#include <string>
#include <thread>
#include <vector>

#include <spdlog/spdlog.h>

#include "bench/bench.h"
#include "plimsoll/base/clock.h"
#include "plimsoll/model/state.h"
#include "plimsoll/store/store.h"
#include "plimsoll/stream/daemon.h"
#include "plimsoll/stream/decode.h"
#include "plimsoll/stream/engine.h"
#include "plimsoll/stream/source.h"
#include "stream/one_stream_source_util.h"

namespace plimsoll::bench {
namespace {

using stream::ModelChoice;

constexpr int kPeriod = 24;
constexpr int64_t kMinute = 60'000;
constexpr int64_t kBaseStep = 24 * 1'230'800;  // 2026-03-01 00:00 UTC in minutes, a season start
constexpr double kPi = 3.14159265358979323846;
constexpr double kNoiseSd = 2.0;

double ThreadCpuSeconds() {
  timespec t{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &t);
  return static_cast<double>(t.tv_sec) + 1e-9 * static_cast<double>(t.tv_nsec);
}

double ProcessCpuSeconds() {
  timespec t{};
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &t);
  return static_cast<double>(t.tv_sec) + 1e-9 * static_cast<double>(t.tv_nsec);
}

int64_t RssBytes() {
  std::ifstream statm("/proc/self/statm");
  int64_t size = 0, resident = 0;
  statm >> size >> resident;
  return resident * sysconf(_SC_PAGESIZE);
}

double Level(size_t series) { return 100.0 + static_cast<double>(series % 97); }
double Season(int64_t step) { return 10.0 * std::sin(2.0 * kPi * static_cast<double>(step % kPeriod) / kPeriod); }

// Series i uses form (i % 97) % 3 (the chooser sees only the level, which gives i % 97).
model::ModelSpec Form(size_t series) {
  using model::ErrorType;
  using model::SeasonType;
  using model::TrendType;
  switch ((series % 97) % 3) {
    case 0: return {ErrorType::kAdditive, TrendType::kAdditiveDamped, SeasonType::kAdditive, kPeriod};
    case 1: return {ErrorType::kAdditive, TrendType::kNone, SeasonType::kAdditive, kPeriod};
    default: return {ErrorType::kMultiplicative, TrendType::kAdditiveDamped, SeasonType::kMultiplicative, kPeriod};
  }
}

// Fixed parameters and the generating level and season as the initial state (the state before
// the first warm-up point, which sits at a season start and carries no noise, so it is the level).
Result<ModelChoice> FixedChoice(std::span<const double> history) {
  double first = 0;
  for (double v : history)
    if (!std::isnan(v)) {
      first = v;
      break;
    }
  const double level = first - Season(0);
  const size_t series = static_cast<size_t>(std::max(0.0, level - 100.0));  // series % 97 is all we need
  ModelChoice c;
  c.spec = Form(series);
  c.params.alpha = 0.2;
  c.params.beta = c.spec.has_trend() ? 0.02 : 0.0;
  c.params.gamma = 0.1;
  c.params.phi = c.spec.damped() ? 0.95 : 1.0;
  std::vector<double> season(kPeriod);
  const bool mult = c.spec.season == model::SeasonType::kMultiplicative;
  for (int j = 0; j < kPeriod; ++j) season[j] = mult ? 1.0 + Season(j) / level : Season(j);
  const double sigma2 = mult ? (kNoiseSd / level) * (kNoiseSd / level) : kNoiseSd * kNoiseSd;
  c.initial = model::MakeState(level, 0.0, season, sigma2);
  c.note = "fixed parameters (benchmark)";
  return c;
}

stream::EngineOptions Options() {
  stream::SeriesRules r;
  r.match = "queue-*";
  r.interval_ms = kMinute;
  r.period = kPeriod;
  r.warmup = 2;
  r.history = 2;
  r.band_level = 0.99;
  stream::EngineOptions o;
  o.profiles.push_back(r);
  return o;
}

// Newline-separated JSON records with kRecordPadding spare bytes at the end, and each line's view.
struct RecordBuffer {
  std::string text;
  std::vector<std::string_view> lines;
};

// Rounds [first_round, first_round + rounds) of every series, series shuffled within each round.
RecordBuffer MakeRecords(size_t series, int64_t first_round, int64_t rounds, uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> noise(0.0, kNoiseSd);
  std::vector<uint32_t> order(series);
  std::iota(order.begin(), order.end(), 0u);
  RecordBuffer out;
  out.text.reserve(static_cast<size_t>(rounds) * series * 61 + stream::kRecordPadding);
  std::vector<size_t> ends;
  ends.reserve(static_cast<size_t>(rounds) * series);
  char line[128];
  for (int64_t r = first_round; r < first_round + rounds; ++r) {
    std::shuffle(order.begin(), order.end(), rng);
    const int64_t step = kBaseStep + r;
    for (uint32_t i : order) {
      // Round 0 is noise-free: the chooser reads each series' level from it.
      const double value = Level(i) + Season(step) + (r == 0 ? 0.0 : noise(rng));
      const int n = std::snprintf(line, sizeof line, "{\"series\":\"queue-%05u\",\"time\":%lld,\"value\":%.2f}\n", i,
                                  static_cast<long long>(step * kMinute), value);
      out.text.append(line, static_cast<size_t>(n));
      ends.push_back(out.text.size() - 1);
    }
  }
  out.text.append(stream::kRecordPadding, ' ');
  size_t begin = 0;
  for (size_t end : ends) {
    out.lines.emplace_back(out.text.data() + begin, end - begin);
    begin = end + 1;
  }
  return out;
}

// Serves a RecordBuffer as one file-like stream (byte offsets); Aborted at its end.
class MemorySource final : public stream::testing::OneStreamSource {
 public:
  MemorySource(const RecordBuffer& records, std::string name) : OneStreamSource(std::move(name)), records_(records) {}

  Status Poll(std::vector<stream::RawRecord>& out, size_t max_records, int) override {
    out.clear();
    if (next_ == records_.lines.size()) return Status::Aborted("end of records");
    const size_t end = std::min(records_.lines.size(), next_ + max_records);
    for (; next_ < end; ++next_) {
      const std::string_view line = records_.lines[next_];
      const int64_t offset = line.data() - records_.text.data();
      out.push_back({{}, line, 0, offset, offset + static_cast<int64_t>(line.size()) + 1, -1});
    }
    return Status::Ok();
  }
  bool PayloadsPadded() const override { return true; }  // lines lie in `text`, which ends in padding

 private:
  const RecordBuffer& records_;
  size_t next_ = 0;
};

class TempDir {
 public:
  TempDir() {
    std::string pattern = (std::filesystem::temp_directory_path() / "plimsoll-engine-bench-XXXXXX").string();
    if (mkdtemp(pattern.data()) == nullptr) throw std::runtime_error("mkdtemp failed");
    path_ = pattern;
  }
  ~TempDir() {
    std::error_code ignored;
    std::filesystem::remove_all(path_, ignored);
  }
  std::string File(const char* name) const { return (path_ / name).string(); }

 private:
  std::filesystem::path path_;
};

// Decodes `records` a block at a time and hands each block to Engine::ObserveBatch, as the
// daemon does with each poll.
void Feed(stream::Engine& engine, stream::RecordDecoder& decoder, const RecordBuffer& records, size_t batch_records) {
  constexpr size_t kBlock = 4096;  // the daemon's default poll size
  stream::DecodedRecord decoded;
  std::vector<stream::Observation> block;
  std::string names;  // decoded series ids of the block (the decoder's view lasts one record)
  std::vector<size_t> name_ends;
  size_t since_batch = 0;
  int64_t offset = 0;
  for (size_t first = 0; first < records.lines.size(); first += kBlock) {
    const size_t last = std::min(records.lines.size(), first + kBlock);
    block.clear();
    names.clear();
    name_ends.clear();
    for (size_t i = first; i < last; ++i) {
      const std::string_view line = records.lines[i];
      Status s = decoder.DecodePadded({}, line, -1, decoded);
      if (!s.ok()) throw std::runtime_error("benchmark record did not decode: " + s.ToString());
      names.append(decoded.series);
      name_ends.push_back(names.size());
      block.push_back({{}, decoded.time_ms, decoded.value, line, 0, offset});
      offset += static_cast<int64_t>(line.size()) + 1;
    }
    for (size_t k = 0, begin = 0; k < block.size(); begin = name_ends[k++])
      block[k].series = std::string_view(names).substr(begin, name_ends[k] - begin);
    engine.ObserveBatch(block);
    since_batch += block.size();
    if (since_batch >= batch_records) {
      KeepAlive(engine.TakeBatch().history.size());
      since_batch = 0;
    }
  }
  KeepAlive(engine.TakeBatch().history.size());
}

BenchReport Run(const BenchArgs& args) {
  const size_t series = args.quick ? 10'000 : 100'000;
  const int64_t rounds = args.quick ? 20 : 30;
  const stream::DaemonOptions daemon_options;  // the `watch` defaults: commit every 100 ms or 50k records
  BenchReport report;
  // The daemon logs at info level to stdout; keep stdout for the one JSON object.
  spdlog::set_level(spdlog::level::warn);

  const RecordBuffer warmup = MakeRecords(series, 0, 2, 7);
  // A running daemon compacts its history log every history_compact_points points, on other
  // threads, while it ingests. So that the timed window holds one whole compaction cycle at a
  // representative phase (not all of it after the last record), untimed pre-roll rounds first
  // fill the log to one and a half times the threshold: one compaction runs in the pre-roll, and
  // the window's records make the next one due midway. The window's is thus not the daemon's
  // first: a first compaction maps its scratch buffers (~150 MB at 100k series), which on the
  // project's VM cost ~0.3 s of page faults that every later compaction is spared.
  const int64_t compact_points = store::StoreOptions().history_compact_points;
  const auto series_count = static_cast<int64_t>(series);
  const int64_t preroll_rounds = series_count * rounds >= compact_points
                                     ? std::max<int64_t>(0, (compact_points * 3 / 2 - 2 * series_count) / series_count)
                                     : 0;
  const RecordBuffer preroll = MakeRecords(series, 2, preroll_rounds, 13);
  const RecordBuffer records = MakeRecords(series, 2 + preroll_rounds, rounds, 11);
  const double record_bytes = static_cast<double>(records.text.size() - stream::kRecordPadding) /
                              static_cast<double>(records.lines.size()) - 1.0;
  const auto chooser = [](std::span<const double> h, const stream::SeriesRules&, bool) { return FixedChoice(h); };

  // 1. Engine path in memory.
  stream::RecordDecoder decoder;
  const int64_t rss_before = RssBytes();
  stream::Engine engine(Options(), chooser, SystemClock());
  Feed(engine, decoder, warmup, daemon_options.commit_records);
  const int64_t rss_after = RssBytes();
  if (engine.counters().fits != series || engine.counters().fit_failures != 0)
    throw std::runtime_error("warm-up did not fit every series");
  const size_t resident = engine.ResidentBytes();
  Feed(engine, decoder, preroll, daemon_options.commit_records);
  const uint64_t flags_before = engine.counters().flags;

  const auto wall0 = std::chrono::steady_clock::now();
  const double cpu0 = ThreadCpuSeconds();
  Feed(engine, decoder, records, daemon_options.commit_records);
  const double cpu = ThreadCpuSeconds() - cpu0;
  const double wall = std::chrono::duration<double>(std::chrono::steady_clock::now() - wall0).count();
  const double n = static_cast<double>(records.lines.size());
  if (engine.counters().observations != series * static_cast<uint64_t>(rounds + 2 + preroll_rounds))
    throw std::runtime_error("engine refused benchmark records");
  const double flags = static_cast<double>(engine.counters().flags - flags_before);

  // 2. The same records through the durable path (fresh store and daemon, warmed up untimed).
  TempDir dir;
  store::StoreOptions store_options;
  store_options.path = dir.File("bench.db");
  store_options.synchronous = store::Synchronous::kNormal;
  Result<std::unique_ptr<store::Store>> opened = store::Store::Open(store_options);
  if (!opened.ok()) throw std::runtime_error(opened.status().ToString());
  Result<std::unique_ptr<stream::Daemon>> daemon =
      stream::Daemon::Open(daemon_options, Options(), chooser, std::move(opened).value(), SystemClock());
  if (!daemon.ok()) throw std::runtime_error(daemon.status().ToString());
  std::atomic<bool> stop{false};
  stream::RecordDecoder durable_decoder;
  MemorySource warm_source(warmup, "memory:warmup");
  Status warmed = (*daemon)->Run(warm_source, durable_decoder, stop);
  if (!warmed.ok()) throw std::runtime_error(warmed.ToString());
  // A compaction made due and still under way belongs to the records that made it due: wait
  // until it is applied (after the pre-roll too, so that none of its work falls in the window).
  const auto wait_for_due_compaction = [&] {
    const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(60);
    while ((*daemon)->StoreCounters().log_points >= compact_points && std::chrono::steady_clock::now() < deadline)
      std::this_thread::sleep_for(std::chrono::milliseconds(1));
  };
  MemorySource preroll_source(preroll, "memory:preroll");
  Status prerolled = (*daemon)->Run(preroll_source, durable_decoder, stop);
  if (!prerolled.ok()) throw std::runtime_error(prerolled.ToString());
  wait_for_due_compaction();
  const store::StoreCounters written_before = (*daemon)->StoreCounters();
  const uint64_t commits_before = (*daemon)->counters().commits.load();
  MemorySource source(records, "memory:records");
  const auto dwall0 = std::chrono::steady_clock::now();
  const double dcpu0 = ProcessCpuSeconds(), owner_cpu0 = ThreadCpuSeconds();
  Status ran = (*daemon)->Run(source, durable_decoder, stop);
  wait_for_due_compaction();
  const double dcpu = ProcessCpuSeconds() - dcpu0, owner_cpu = ThreadCpuSeconds() - owner_cpu0;
  const double dwall = std::chrono::duration<double>(std::chrono::steady_clock::now() - dwall0).count();
  if (!ran.ok()) throw std::runtime_error(ran.ToString());
  if ((*daemon)->engine().counters().observations != series * static_cast<uint64_t>(rounds + 2 + preroll_rounds))
    throw std::runtime_error("daemon refused benchmark records");
  const uint64_t commits = (*daemon)->counters().commits.load() - commits_before;
  const store::StoreCounters written = (*daemon)->StoreCounters();

  const double engine_rate = n / wall, engine_cpu_rate = n / cpu;
  const double durable_rate = n / dwall, durable_cpu_rate = n / dcpu;
  report.Add("engine_records_per_s", engine_rate);
  report.Add("engine_records_per_cpu_s", engine_cpu_rate);
  report.Add("engine_ns_per_record", 1e9 * cpu / n);
  report.Add("durable_records_per_s", durable_rate);
  report.Add("durable_records_per_cpu_s", durable_cpu_rate);
  report.Add("durable_ratio", durable_rate / engine_rate);
  report.Add("durable_ratio_cpu", durable_cpu_rate / engine_cpu_rate);
  report.Add("durable_commits", static_cast<int64_t>(commits));
  report.Add("durable_owner_cpu_s", owner_cpu);
  report.Add("durable_other_cpu_s", dcpu - owner_cpu);
  report.Add("durable_states_written", static_cast<int64_t>(written.states_written));
  report.Add("durable_compactions", static_cast<int64_t>(written.compactions - written_before.compactions));
  report.Add("durable_compaction_s", 1e-6 * static_cast<double>(written.compaction_micros - written_before.compaction_micros));
  report.Add("durable_commit_max_ms", 1e-3 * static_cast<double>(written.max_commit_micros));
  report.Add("bytes_per_series", static_cast<double>(resident) / static_cast<double>(series));
  report.Add("rss_bytes_per_series", static_cast<double>(rss_after - rss_before) / static_cast<double>(series));
  report.Add("flags_per_record", flags / n);
  report.Add("series", static_cast<int64_t>(series));
  report.Add("records", static_cast<int64_t>(records.lines.size()));
  report.Add("preroll_records", static_cast<int64_t>(preroll.lines.size()));
  report.Add("record_bytes_mean", record_bytes);
  report.Add("period", static_cast<int64_t>(kPeriod));
  report.notes.push_back(
      "fitting is out of the measurement: a fixed ModelChooser (alpha 0.2, beta 0.02, gamma 0.1, phi 0.95; the "
      "data's level and season as initial state); series warmed up before timing");
  report.notes.push_back("forms by series: ETS(A,Ad,A), ETS(A,N,A), ETS(M,Ad,M); m = 24; records shuffled per round");
  report.notes.push_back("durable path: Daemon::Run over an in-memory source, SQLite WAL, synchronous NORMAL, temp "
                         "file, commit every 100 ms or 50k records, states at checkpoints every 5 s or 64 records per changed "
                         "series and at the end (watch defaults)");
  return report;
}

PLIMSOLL_BENCH("engine", "engine path (decode + route + align + update + flag) in memory and durable", Run);

}  // namespace
}  // namespace plimsoll::bench
