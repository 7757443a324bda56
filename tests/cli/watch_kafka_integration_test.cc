// The daemon (`watch`) against Kafka on the embedded broker: kcat as the outside producer, the
// real binary killed with SIGKILL mid-stream, fault injection through the mock cluster's API, a
// second instance in the same group, and bad records. Every run's states are compared with the
// same records fed through the file source (bit-identical checkpoints).
//
// Records are keyed by series, so each series' records stay in order in one partition; states do
// not depend on how partitions interleave. Consumer settings for a fast group on the mock:
// session.timeout.ms=6000, heartbeat.interval.ms=1000, auto.offset.reset=error.
#include <signal.h>
#include <spdlog/sinks/ringbuffer_sink.h>
#include <spdlog/spdlog.h>
#include <sys/wait.h>
#include <unistd.h>

#include <catch2/catch.hpp>
#include <atomic>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <functional>
#include <map>
#include <set>
#include <string>
#include <thread>
#include <tuple>
#include <vector>

#include "cli/daemon_setup.h"
#include "cli/sources.h"
#include "plimsoll/kafka/embedded_broker.h"
#include "plimsoll/kafka/kafka_source.h"
#include "cli/watch_run_util.h"
#include "plimsoll/store/store.h"
#include "plimsoll/stream/config.h"
#include "plimsoll/stream/decode.h"

namespace plimsoll {
namespace {

using watch_test::OpenReadOnly;
using watch_test::CheckSame;
using watch_test::Outcome;
using watch_test::ReadOutcome;
using watch_test::StartWatch;
using watch_test::WaitExit;

namespace fs = std::filesystem;
using Clock = std::chrono::steady_clock;

constexpr int kSeries = 12;
constexpr int kSteps = 300;  // 12 x 300 = 3600 records

struct Line {
  std::string key;
  std::string payload;
};

// Invented feed: hourly series with a daily rhythm, deterministic noise, and spikes (flagged).
std::vector<Line> MakeFeed() {
  std::vector<Line> lines;
  uint64_t noise = 20261202;
  const int64_t t0 = 1'767'225'600;  // 2026-01-01T00:00:00Z
  char buf[160];
  for (int k = 0; k < kSteps; ++k)
    for (int s = 0; s < kSeries; ++s) {
      noise = noise * 6364136223846793005ULL + 1442695040888963407ULL;
      const double u = static_cast<double>(noise >> 11) / 9007199254740992.0;  // [0, 1)
      double value = 100.0 + 5 * s + 20.0 * std::sin(2 * M_PI * k / 24.0) + 6.0 * (u - 0.5);
      if (k > 100 && (k + 7 * s) % 61 == 0) value += 70.0;
      const std::string key = "q-" + std::to_string(s);
      std::snprintf(buf, sizeof(buf), "{\"series\":\"%s\",\"time\":%lld,\"value\":%.6f}", key.c_str(),
                    static_cast<long long>(t0 + 3600LL * k), value);
      lines.push_back({key, buf});
    }
  return lines;
}

class TempDir {
 public:
  explicit TempDir(const std::string& stem)
      : path_(fs::temp_directory_path() / ("plimsoll-" + stem + "-" + std::to_string(getpid()))) {
    fs::remove_all(path_);
    fs::create_directories(path_);
  }
  ~TempDir() { fs::remove_all(path_); }
  std::string operator/(const std::string& name) const { return (path_ / name).string(); }

 private:
  fs::path path_;
};

// Alert-triggered refits swap models at points that depend on timing; these tests compare
// states across runs, so they leave them off (background warm-up fits are deterministic).
const char kProfile[] =
    "[refit]\non_alert = false\n"
    "[[profile]]\nmatch = \"*\"\ninterval = \"1h\"\nperiod = 24\nwarmup = 72\nhistory = 300\n"
    "forms = [\"ANA\", \"MNA\"]\n";

std::string FileConfig(const std::string& feed, const std::string& db) {
  return "[source]\nkind = \"file\"\npath = \"" + feed + "\"\n[store]\npath = \"" + db +
         "\"\ncommit_ms = 50\n[logging]\nlevel = \"warn\"\n" + kProfile;
}

std::string KafkaConfig(const std::string& bootstrap, const std::string& topic, const std::string& group,
                        const std::string& db, int commit_ms, const std::string& extra_sink = "") {
  return "[source]\nkind = \"kafka\"\n[source.kafka]\ntopics = [\"" + topic + "\"]\ngroup = \"" + group +
         "\"\n[source.kafka.properties]\n\"bootstrap.servers\" = \"" + bootstrap +
         "\"\n\"session.timeout.ms\" = 6000\n\"heartbeat.interval.ms\" = 1000\n\"auto.offset.reset\" = \"error\"\n"
         "\"fetch.error.backoff.ms\" = 50\n\"reconnect.backoff.ms\" = 50\n\"reconnect.backoff.max.ms\" = 200\n"
         "[sink]\n" + extra_sink + "\n[store]\npath = \"" + db + "\"\ncommit_ms = " + std::to_string(commit_ms) +
         "\n[logging]\nlevel = \"info\"\n" + kProfile;
}

void WriteFile(const std::string& path, const std::string& text) {
  std::ofstream out(path);
  out << text;
}

// "key:payload" lines for kcat -K:, and payload-only lines for the file source.
void WriteKeyed(const std::string& path, const std::vector<Line>& lines, size_t begin, size_t end) {
  std::ofstream out(path);
  for (size_t i = begin; i < end; ++i) out << lines[i].key << ':' << lines[i].payload << '\n';
}

void Kcat(const std::string& bootstrap, const std::string& topic, const std::string& file) {
  const std::string command = "kcat -P -b " + bootstrap + " -t " + topic + " -K: -l " + file;
  INFO(command);
  REQUIRE(std::system(command.c_str()) == 0);
}

// Every message of `topic` (all partitions, from the beginning), read by kcat.
std::vector<std::string> KcatReadAll(const std::string& bootstrap, const std::string& topic) {
  const std::string command = "kcat -C -b " + bootstrap + " -t " + topic + " -o beginning -e -q -f '%s\\n'";
  std::vector<std::string> out;
  FILE* pipe = popen(command.c_str(), "r");
  REQUIRE(pipe != nullptr);
  char* line = nullptr;
  size_t capacity = 0;
  ssize_t n;
  while ((n = getline(&line, &capacity, pipe)) > 0) out.emplace_back(line, static_cast<size_t>(n - 1));
  free(line);
  pclose(pipe);
  return out;
}

// Sum of stored next offsets over the partitions of `stream`; -1 while the file cannot be read.
int64_t StoredTotal(const std::string& db, const std::string& stream) {
  if (!fs::exists(db)) return -1;
  auto store = OpenReadOnly(db);
  if (store == nullptr) return -1;
  int64_t total = 0;
  for (const store::PositionRecord& p : store->Positions())
    if (p.stream == stream) total += p.next_offset;
  return total;
}

bool WaitFor(const std::function<bool()>& done, int timeout_ms, int step_ms = 20) {
  const auto deadline = Clock::now() + std::chrono::milliseconds(timeout_ms);
  while (Clock::now() < deadline) {
    if (done()) return true;
    std::this_thread::sleep_for(std::chrono::milliseconds(step_ms));
  }
  return done();
}

// The reference: the same payloads through the file source (the real binary).
Outcome FileReference(const TempDir& dir, const std::vector<Line>& lines) {
  const std::string feed = dir / "reference.jsonl";
  {
    std::ofstream out(feed);
    for (const Line& l : lines) out << l.payload << '\n';
  }
  const std::string config = dir / "reference.toml";
  WriteFile(config, FileConfig(feed, dir / "reference.db"));
  REQUIRE(WaitExit(StartWatch(config)) == 0);
  Outcome reference = ReadOutcome(dir / "reference.db");
  REQUIRE(reference.states.size() == kSeries);
  REQUIRE(reference.flags.size() >= 10);  // the spikes are flagged
  return reference;
}


std::string StartBroker(std::unique_ptr<kafka::EmbeddedBroker>& broker, const std::string& topic, int partitions) {
  kafka::EmbeddedBrokerOptions options;
  options.topics.push_back({topic, partitions});
  auto started = kafka::EmbeddedBroker::Start(options);
  REQUIRE(started.ok());
  broker = std::move(started).value();
  return broker->BootstrapServers();
}

// Captures log lines (the daemon logs through spdlog's default logger).
class LogCapture {
 public:
  LogCapture() : sink_(std::make_shared<spdlog::sinks::ringbuffer_sink_mt>(4096)) {
    spdlog::default_logger()->sinks().push_back(sink_);
  }
  ~LogCapture() {
    auto& sinks = spdlog::default_logger()->sinks();
    sinks.erase(std::remove(sinks.begin(), sinks.end(), sink_), sinks.end());
  }
  bool Contains(const std::string& text) const {
    for (const std::string& line : sink_->last_formatted())
      if (line.find(text) != std::string::npos) return true;
    return false;
  }

 private:
  std::shared_ptr<spdlog::sinks::ringbuffer_sink_mt> sink_;
};

// `watch` in this process (as src/cli/watch_command.cc wires it), so counters are readable.
class InProcessWatch {
 public:
  explicit InProcessWatch(const std::string& toml) {
    auto config = stream::ParseConfig(toml, "test");
    REQUIRE(config.ok());
    config_ = std::move(config).value();
    spdlog::set_level(spdlog::level::info);
    auto daemon = cli::OpenDaemon(config_, SystemClock());
    REQUIRE(daemon.ok());
    daemon_ = std::move(daemon).value();
    auto opened = cli::OpenSource(config_, *daemon_);
    REQUIRE(opened.ok());
    opened_ = std::move(opened).value();
    decoder_ = std::make_unique<stream::RecordDecoder>(config_.source.decode);
    thread_ = std::thread([this] {
      result_ = daemon_->Run(*opened_.source, *decoder_, stop_, opened_.sink.get());
      finished_.store(true);
    });
  }
  ~InProcessWatch() { IgnoreError(Stop()); }

  Status Stop() {
    stop_.store(true);
    if (thread_.joinable()) thread_.join();
    return result_;
  }
  bool finished() const { return finished_.load(); }
  const stream::Daemon& daemon() const { return *daemon_; }
  kafka::KafkaSourceCounters Source() const {
    return dynamic_cast<const kafka::KafkaSource&>(*opened_.source).Counters();
  }

 private:
  stream::Config config_;
  std::unique_ptr<stream::Daemon> daemon_;
  cli::OpenedSource opened_;
  std::unique_ptr<stream::RecordDecoder> decoder_;
  std::atomic<bool> stop_{false};
  std::atomic<bool> finished_{false};
  Status result_;
  std::thread thread_;
};

}  // namespace

TEST_CASE("watch on Kafka fed by kcat ends with the states of the file source, bit for bit", "[cli][kafka]") {
  if (std::system("command -v kcat >/dev/null 2>&1") != 0) FAIL("kcat is not installed (Debian package kcat)");
  TempDir dir("kwatch");
  const std::vector<Line> lines = MakeFeed();
  const Outcome reference = FileReference(dir, lines);

  std::unique_ptr<kafka::EmbeddedBroker> broker;
  const std::string topic = "obs-kcat";
  const std::string bootstrap = StartBroker(broker, topic, 4);
  const std::string db = dir / "kafka.db";
  const std::string config = dir / "kafka.toml";
  WriteFile(config, KafkaConfig(bootstrap, topic, "g-kcat", db, 50));
  pid_t pid = StartWatch(config);
  // kcat produces while watch consumes (watch is already joining the group).
  const std::string keyed = dir / "keyed.txt";
  WriteKeyed(keyed, lines, 0, lines.size() / 2);
  Kcat(bootstrap, topic, keyed);
  std::this_thread::sleep_for(std::chrono::milliseconds(200));
  WriteKeyed(keyed, lines, lines.size() / 2, lines.size());
  Kcat(bootstrap, topic, keyed);
  const bool complete = WaitFor([&] { return StoredTotal(db, "kafka:" + topic) == int64_t(lines.size()); }, 60000, 100);
  kill(pid, SIGTERM);
  REQUIRE(WaitExit(pid) == 0);
  REQUIRE(complete);
  CheckSame(ReadOutcome(db), reference);
}

TEST_CASE("watch on Kafka killed with SIGKILL mid-stream resumes from stored positions: nothing lost or repeated",
          "[cli][kafka][crash]") {
  if (std::system("command -v kcat >/dev/null 2>&1") != 0) FAIL("kcat is not installed (Debian package kcat)");
  TempDir dir("kcrash");
  const std::vector<Line> lines = MakeFeed();
  const Outcome reference = FileReference(dir, lines);

  std::unique_ptr<kafka::EmbeddedBroker> broker;
  const std::string topic = "obs-crash";
  const std::string stream = "kafka:" + topic;
  const std::string bootstrap = StartBroker(broker, topic, 4);
  const std::string db = dir / "kafka.db";
  const std::string config = dir / "kafka.toml";
  // Commits every second: a kill 300 ms after new records arrive lands on records read but not
  // yet durable, which the next run must read again from the stored positions.
  WriteFile(config, KafkaConfig(bootstrap, topic, "g-crash", db, 1000));
  const std::string keyed = dir / "keyed.txt";
  const size_t thirds[] = {0, lines.size() / 3, 2 * lines.size() / 3, lines.size()};
  WriteKeyed(keyed, lines, thirds[0], thirds[1]);
  Kcat(bootstrap, topic, keyed);

  int kills = 0;
  pid_t pid = StartWatch(config);
  for (int part = 1; part <= 2; ++part) {
    // Wait until the previous part is durable, add the next one, and kill shortly after.
    REQUIRE(WaitFor([&] { return StoredTotal(db, stream) == int64_t(thirds[part]); }, 60000, 50));
    WriteKeyed(keyed, lines, thirds[part], thirds[part + 1]);
    Kcat(bootstrap, topic, keyed);
    std::this_thread::sleep_for(std::chrono::milliseconds(300));
    const int64_t stored_at_kill = StoredTotal(db, stream);
    kill(pid, SIGKILL);
    REQUIRE(WaitExit(pid) == -SIGKILL);
    ++kills;
    INFO("part " << part << ": stored " << stored_at_kill << " of " << thirds[part + 1]);
    CHECK(stored_at_kill < int64_t(thirds[part + 1]));  // the kill interrupted work in progress
    pid = StartWatch(config);  // rejoins the group once the killed member's session expires
  }
  const bool complete = WaitFor([&] { return StoredTotal(db, stream) == int64_t(lines.size()); }, 60000, 100);
  kill(pid, SIGTERM);
  REQUIRE(WaitExit(pid) == 0);
  REQUIRE(complete);
  CHECK(kills == 2);
  CheckSame(ReadOutcome(db), reference);
}

TEST_CASE("watch rides out fetch, commit and produce errors and a broker outage with undisturbed states",
          "[cli][kafka][faults]") {
  if (std::system("command -v kcat >/dev/null 2>&1") != 0) FAIL("kcat is not installed (Debian package kcat)");
  TempDir dir("kfaults");
  const std::vector<Line> lines = MakeFeed();
  const Outcome reference = FileReference(dir, lines);
  constexpr int16_t kApiProduce = 0, kApiFetch = 1, kApiOffsetCommit = 8;

  std::unique_ptr<kafka::EmbeddedBroker> broker;
  const std::string topic = "obs-faults";
  const std::string bootstrap = StartBroker(broker, topic, 3);
  rd_kafka_mock_cluster_t* mock = broker->TEST_Cluster();
  const std::string keyed = dir / "keyed.txt";
  const size_t thirds[] = {0, lines.size() / 3, 2 * lines.size() / 3, lines.size()};
  WriteKeyed(keyed, lines, thirds[0], thirds[1]);
  Kcat(bootstrap, topic, keyed);

  LogCapture logs;
  // The sink's first produce requests (after the first durable commit) meet errors; the
  // idempotent producer retries them without duplicates.
  rd_kafka_mock_push_request_errors(mock, kApiProduce, 3, RD_KAFKA_RESP_ERR_NOT_LEADER_FOR_PARTITION,
                                    RD_KAFKA_RESP_ERR_REQUEST_TIMED_OUT, RD_KAFKA_RESP_ERR_NOT_ENOUGH_REPLICAS);
  InProcessWatch watch(KafkaConfig(bootstrap, topic, "g-faults", dir / "kafka.db", 50));
  const auto records = [&] { return watch.daemon().counters().records.load(); };
  REQUIRE(WaitFor([&] { return records() >= thirds[1]; }, 30000));

  // Fetch errors, then an advisory commit refused, while the second third arrives.
  rd_kafka_mock_push_request_errors(mock, kApiFetch, 4, RD_KAFKA_RESP_ERR_UNKNOWN, RD_KAFKA_RESP_ERR_UNKNOWN,
                                    RD_KAFKA_RESP_ERR_NOT_LEADER_FOR_PARTITION, RD_KAFKA_RESP_ERR_UNKNOWN);
  rd_kafka_mock_push_request_errors(mock, kApiOffsetCommit, 2, RD_KAFKA_RESP_ERR_OFFSET_METADATA_TOO_LARGE,
                                    RD_KAFKA_RESP_ERR_OFFSET_METADATA_TOO_LARGE);
  WriteKeyed(keyed, lines, thirds[1], thirds[2]);
  Kcat(bootstrap, topic, keyed);
  REQUIRE(WaitFor([&] { return records() >= thirds[2]; }, 30000));

  // The only broker goes down for 2.5 s while the daemon keeps polling, then the last third.
  REQUIRE(rd_kafka_mock_broker_set_down(mock, 1) == RD_KAFKA_RESP_ERR_NO_ERROR);
  std::this_thread::sleep_for(std::chrono::milliseconds(2500));
  CHECK_FALSE(watch.finished());
  REQUIRE(rd_kafka_mock_broker_set_up(mock, 1) == RD_KAFKA_RESP_ERR_NO_ERROR);
  WriteKeyed(keyed, lines, thirds[2], thirds[3]);
  Kcat(bootstrap, topic, keyed);
  REQUIRE(WaitFor([&] { return records() >= lines.size() && watch.Source().lag == 0; }, 60000));
  std::this_thread::sleep_for(std::chrono::milliseconds(500));  // sink deliveries
  const kafka::KafkaSourceCounters c = watch.Source();
  const uint64_t polled = records();
  REQUIRE(watch.Stop().ok());

  INFO("fetch_errors=" << c.fetch_errors << " transport_errors=" << c.transport_errors
                       << " commit_failures=" << c.commit_failures << " other=" << c.other_errors
                       << " commits=" << c.commits);
  CHECK(polled == lines.size());  // nothing read twice (no rebalance happened)
  CHECK(c.fetch_errors + c.other_errors >= 1);
  CHECK(c.transport_errors >= 1);
  CHECK(c.commit_failures >= 1);
  CHECK(c.commits >= 1);
  CHECK(logs.Contains("advisory offset commit"));
  CheckSame(ReadOutcome(dir / "kafka.db"), reference);

  // Outputs despite the Produce errors: every durable flag reached the flags topic.
  std::set<std::string> ids;
  for (const std::string& event : KcatReadAll(bootstrap, "plimsoll.flags")) {
    const size_t at = event.find("\"id\":\"");
    REQUIRE(at != std::string::npos);
    ids.insert(event.substr(at + 6, event.find('"', at + 6) - at - 6));
  }
  std::set<std::string> expected;
  for (const auto& f : reference.flags) expected.insert(std::get<0>(f) + "@" + std::to_string(std::get<1>(f)));
  CHECK(ids == expected);
}

TEST_CASE("a second instance in the group holds a partition consumed before and stays healthy",
          "[cli][kafka][group]") {
  if (std::system("command -v kcat >/dev/null 2>&1") != 0) FAIL("kcat is not installed (Debian package kcat)");
  TempDir dir("kgroup");
  const std::vector<Line> lines = MakeFeed();
  std::unique_ptr<kafka::EmbeddedBroker> broker;
  const std::string topic = "obs-group";
  const std::string bootstrap = StartBroker(broker, topic, 2);
  const std::string keyed = dir / "keyed.txt";
  WriteKeyed(keyed, lines, 0, 1200);
  Kcat(bootstrap, topic, keyed);

  LogCapture logs;
  InProcessWatch first(KafkaConfig(bootstrap, topic, "g-pair", dir / "first.db", 50));
  REQUIRE(WaitFor([&] { return first.daemon().counters().records.load() >= 1200 && first.Source().commits >= 2; },
                  30000));
  std::this_thread::sleep_for(std::chrono::milliseconds(500));  // advisory commits for both partitions

  InProcessWatch second(KafkaConfig(bootstrap, topic, "g-pair", dir / "second.db", 50));
  // The rebalance hands the newcomer one of the two partitions, which the group consumed before.
  REQUIRE(WaitFor([&] { return second.Source().held_partitions >= 1; }, 30000));
  CHECK(logs.Contains("holding partition"));
  WriteKeyed(keyed, lines, 1200, 2400);
  Kcat(bootstrap, topic, keyed);
  // The first instance keeps reading its partition; the second reads nothing and stays up.
  REQUIRE(WaitFor([&] { return first.Source().lag == 0 && first.Source().assigned_partitions == 1; }, 30000));
  std::this_thread::sleep_for(std::chrono::milliseconds(1000));
  const kafka::KafkaSourceCounters held = second.Source();
  CHECK(held.held_partitions == 1);
  CHECK(held.held_total >= 1);
  CHECK(held.paused_partitions >= 1);
  CHECK(held.records == 0);
  CHECK_FALSE(second.finished());
  CHECK(second.daemon().engine().series_count() == 0);
  CHECK(first.daemon().counters().records.load() > 1200);
  REQUIRE(second.Stop().ok());
  REQUIRE(first.Stop().ok());
}

TEST_CASE("bad records on the topic are dead-lettered to the table and the topic, and reading goes on",
          "[cli][kafka][dead-letter]") {
  if (std::system("command -v kcat >/dev/null 2>&1") != 0) FAIL("kcat is not installed (Debian package kcat)");
  TempDir dir("kdead");
  std::unique_ptr<kafka::EmbeddedBroker> broker;
  const std::string topic = "obs-dead";
  const std::string bootstrap = StartBroker(broker, topic, 1);
  REQUIRE(broker->CreateTopic({"obs-dead.letters", 1}).ok());

  std::vector<Line> lines;
  const std::vector<std::string> bad = {
      "{\"series\":\"q-1\",\"time\":1767225600,",                          // malformed (cut off)
      "",                                                                   // empty
      "{\"series\":\"q-1\",\"time\":1767229200,\"value\":1,\"pad\":\"" + std::string(100'000, 'x') + "\"}",  // huge
      "{\"series\":\"q-1\",\"time\":\"yesterday\",\"value\":\"high\"}",  // wrong types
      "{\"series\":7,\"time\":1767232800,\"value\":2}",                      // series not a string
  };
  int good = 0;
  for (int k = 0; k < 100; ++k) {
    lines.push_back({"q-1", "{\"series\":\"q-1\",\"time\":" + std::to_string(1767225600 + 3600 * k) +
                                ",\"value\":" + std::to_string(50 + k % 7) + "}"});
    ++good;
    if (k % 20 == 10) lines.push_back({"bad", bad[static_cast<size_t>(k / 20)]});
  }
  REQUIRE(lines.size() == 105);
  const std::string keyed = dir / "keyed.txt";
  WriteKeyed(keyed, lines, 0, lines.size());
  Kcat(bootstrap, topic, keyed);

  InProcessWatch watch(KafkaConfig(bootstrap, topic, "g-dead", dir / "kafka.db", 50,
                                   "dead_letter_topic = \"obs-dead.letters\"\n"));
  REQUIRE(WaitFor([&] { return watch.Source().records >= int64_t(lines.size()) && watch.Source().lag == 0; },
                  30000));
  std::this_thread::sleep_for(std::chrono::milliseconds(500));  // sink deliveries
  REQUIRE(watch.Stop().ok());
  CHECK(watch.daemon().engine().counters().observations == static_cast<uint64_t>(good));

  auto store = OpenReadOnly(dir / "kafka.db");
  REQUIRE(store != nullptr);
  auto dead = store->RecentDeadLetters(1000);
  REQUIRE(dead.ok());
  std::set<int64_t> offsets;
  for (const store::StoredDeadLetter& d : *dead) {
    INFO("offset " << d.record.offset << ": " << d.record.reason);
    CHECK(d.record.stream == "kafka:" + topic);
    CHECK_FALSE(d.record.reason.empty());
    offsets.insert(d.record.offset);
  }
  std::set<int64_t> expected;
  for (size_t i = 0; i < lines.size(); ++i)
    if (lines[i].key == "bad") expected.insert(static_cast<int64_t>(i));
  CHECK(offsets == expected);

  const std::vector<std::string> letters = KcatReadAll(bootstrap, "obs-dead.letters");
  std::set<std::string> letter_ids;
  for (const std::string& event : letters) {
    CHECK(event.find("\"kind\":\"dead_letter\"") != std::string::npos);
    const size_t at = event.find("\"id\":\"");
    REQUIRE(at != std::string::npos);
    letter_ids.insert(event.substr(at + 6, event.find('"', at + 6) - at - 6));
  }
  std::set<std::string> expected_ids;
  for (int64_t offset : expected) expected_ids.insert("kafka:" + topic + ":0:" + std::to_string(offset));
  CHECK(letter_ids == expected_ids);
}

}  // namespace plimsoll
