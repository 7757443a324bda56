#include "plimsoll/stream/config.h"
#include "plimsoll/stream/daemon.h"

#include <fstream>
#include <string>

#include <catch2/catch.hpp>

namespace plimsoll::stream {
namespace {

Config Parse(std::string_view text) {
  Result<Config> c = ParseConfig(text, "t.toml");
  INFO(c.status().ToString());
  REQUIRE(c.ok());
  return *c;
}

std::string Error(std::string_view text) {
  Result<Config> c = ParseConfig(text, "t.toml");
  INFO(text);
  REQUIRE_FALSE(c.ok());
  CHECK(c.status().code() == StatusCode::kInvalidArgument);
  return c.status().message();
}

}  // namespace

TEST_CASE("empty config gives the documented defaults", "[stream]") {
  Config c = Parse("");
  CHECK(c.source.kind == SourceKind::kStdin);
  CHECK(c.source.path.empty());
  CHECK_FALSE(c.source.follow);
  CHECK(c.source.decode.format == RecordFormat::kAuto);
  CHECK(c.source.decode.max_record_bytes == 65536);
  CHECK(c.source.decode.max_series_bytes == 200);
  CHECK(c.source.decode.min_time_ms == 0);
  CHECK(c.source.decode.max_time_ms == 7258118400000);  // 2200-01-01 (GNU date -u -d 2200-01-01 +%s)
  CHECK(c.source.read_buffer_bytes == 1048576);
  CHECK(c.source.kafka.topics == std::vector<std::string>{"plimsoll.observations"});
  CHECK(c.source.kafka.group == "plimsoll");
  CHECK(c.source.kafka.properties.empty());
  CHECK(c.store.path == "plimsoll.db");
  CHECK(c.store.synchronous == SyncLevel::kNormal);
  CHECK(c.store.commit_ms == 100);
  CHECK(c.store.commit_records == 50000);
  CHECK(c.store.checkpoint_ms == 5000);
  CHECK(c.band.level == 0.99);
  CHECK(c.band.breach_run == 3);
  CHECK(c.band.breach_window == 0);
  CHECK(c.band.clear_run == 5);
  CHECK(c.band.policy == FlagPolicy::kClip);
  CHECK(c.series.create);
  CHECK(c.refit.threads == 0);
  CHECK(c.refit.every == 0);
  CHECK(c.refit.max_age_ms == 7 * 86400000LL);
  CHECK(c.http.listen == "127.0.0.1:8470");
  CHECK(c.logging.level == "info");
  REQUIRE(c.profiles.size() == 1);
  const ProfileOptions& p = c.profiles[0];
  CHECK(p.match == "*");
  CHECK_FALSE(p.interval_ms.has_value());
  CHECK(p.period == 1);
  CHECK(p.forms.empty());
  CHECK(p.band == 0.99);
  CHECK(p.history == 1000);
  CHECK(p.warmup == 20);
  CHECK(p.aggregate == AggregateKind::kNone);
  CHECK(p.max_gap_ms == 7 * 86400000LL);
  CHECK(p.policy == FlagPolicy::kClip);
}

TEST_CASE("profiles read every key and inherit band and refit defaults", "[stream]") {
  Config c = Parse(R"toml(
[band]
level = 0.95
policy = "skip"
[refit]
every = 500
[[profile]]
match = "queue-*"
interval = "15m"
period = 96
forms = ["ETS(A,Ad,A)", "MNM", {error = "multiplicative", trend = "additive_damped", season = "multiplicative"}]
history = 5000
warmup = 300
max_gap = "2d"
policy = "update"
[[profile]]
match = "tx-[0-9]*"
interval = "1m"
aggregate = "sum"
allowed_lateness = "30s"
band = 0.999
refit_every = 100
refit_max_age = "none"
)toml");
  REQUIRE(c.profiles.size() == 2);
  const ProfileOptions& q = c.profiles[0];
  CHECK(q.interval_ms == 900000);
  CHECK(q.period == 96);
  REQUIRE(q.forms.size() == 3);
  CHECK(q.forms[0].Notation() == "ETS(A,Ad,A)");
  CHECK(q.forms[1].Notation() == "ETS(M,N,M)");
  CHECK(q.forms[2].Notation() == "ETS(M,Ad,M)");
  CHECK(q.forms[0].period == 96);
  CHECK(q.history == 5000);
  CHECK(q.warmup == 300);
  CHECK(q.max_gap_ms == 2 * 86400000LL);
  CHECK(q.band == 0.95);
  CHECK(q.policy == FlagPolicy::kUpdate);
  CHECK(q.refit_every == 500);
  const ProfileOptions& t = c.profiles[1];
  CHECK(t.aggregate == AggregateKind::kSum);
  CHECK(t.allowed_lateness_ms == 30000);
  CHECK(t.band == 0.999);
  CHECK(t.policy == FlagPolicy::kSkip);
  CHECK(t.refit_every == 100);
  CHECK_FALSE(t.refit_max_age_ms.has_value());
  CHECK(t.line == 16);
}

TEST_CASE("profile defaults scale with the period", "[stream]") {
  Config c = Parse("[[profile]]\nperiod = 168\n");
  CHECK(c.profiles[0].history == 1680);
  CHECK(c.profiles[0].warmup == 840);
}

TEST_CASE("first matching profile wins and unmatched series get -1", "[stream]") {
  Config c = Parse(R"(
[[profile]]
match = "queue-vip-*"
[[profile]]
match = "queue-*"
[[profile]]
match = "sensor-?"
)");
  CHECK(c.MatchProfile("queue-vip-3") == 0);
  CHECK(c.MatchProfile("queue-3") == 1);
  CHECK(c.MatchProfile("sensor-7") == 2);
  CHECK(c.MatchProfile("sensor-77") == -1);
  CHECK(c.MatchProfile("card") == -1);
}

TEST_CASE("globs match stars, single characters, classes and escapes", "[stream]") {
  CHECK(GlobMatch("*", ""));
  CHECK(GlobMatch("*", "anything/at.all"));
  CHECK(GlobMatch("a*b*c", "a-b-b-c"));
  CHECK_FALSE(GlobMatch("a*b*c", "a-b-b-"));
  CHECK(GlobMatch("q??", "q12"));
  CHECK_FALSE(GlobMatch("q??", "q1"));
  CHECK(GlobMatch("s[0-9]", "s5"));
  CHECK_FALSE(GlobMatch("s[0-9]", "sx"));
  CHECK(GlobMatch("s[!0-9]", "sx"));
  CHECK(GlobMatch("s[^0-9]", "sx"));
  CHECK(GlobMatch("s[]]", "s]"));
  CHECK(GlobMatch("a\\*", "a*"));
  CHECK_FALSE(GlobMatch("a\\*", "ab"));
  CHECK(GlobMatch("*.*.*", "eu.west.queue"));
  CHECK(GlobMatch("**x", "x"));
  CHECK(ValidateGlob("a[b").message() == "unterminated '[' at position 1");
  CHECK(ValidateGlob("a\\").message() == "trailing '\\' escapes nothing");
}

TEST_CASE("unknown root key is refused with a suggestion", "[stream]") {
  CHECK(Error("[sorce]\nkind = \"file\"\n") == "t.toml:1: unknown key 'sorce' in [root]; did you mean 'source'?");
}

TEST_CASE("unknown key in a section is refused with a suggestion", "[stream]") {
  CHECK(Error("[store]\ncommit_msec = 5\n") ==
        "t.toml:2: unknown key 'commit_msec' in [store]; did you mean 'commit_ms'?");
}

TEST_CASE("unknown key in a profile names the profile", "[stream]") {
  CHECK(Error("[[profile]]\nmatch = \"a\"\n[[profile]]\nintreval = \"1h\"\n") ==
        "t.toml:4: unknown key 'intreval' in [profile[1]]; did you mean 'interval'?");
}

TEST_CASE("unknown key without a near name has no suggestion", "[stream]") {
  CHECK(Error("[http]\nzzzzzz = 1\n") == "t.toml:2: unknown key 'zzzzzz' in [http]");
}

TEST_CASE("toml syntax errors name the line", "[stream]") {
  CHECK_THAT(Error("[store]\npath = \"x\n"), Catch::StartsWith("t.toml:2: TOML syntax:"));
}

TEST_CASE("profile band outside (0, 1) names the key", "[stream]") {
  CHECK(Error("[[profile]]\n[[profile]]\n[[profile]]\nband = 1.5\n") == "t.toml:4: profile[2].band: 1.5 is not in (0, 1)");
}

TEST_CASE("band level outside (0, 1) names the key", "[stream]") {
  CHECK(Error("[band]\nlevel = 0\n") == "t.toml:2: band.level: 0 is not in (0, 1)");
}

TEST_CASE("wrong value types name the key and both types", "[stream]") {
  CHECK(Error("[store]\ncommit_ms = \"100\"\n") == "t.toml:2: store.commit_ms: expected an integer, got string");
  CHECK(Error("[series]\ncreate = 1\n") == "t.toml:2: series.create: expected true or false, got integer");
  CHECK(Error("[store]\npath = 5\n") == "t.toml:2: store.path: expected a string, got integer");
  CHECK(Error("source = 3\n") == "t.toml:1: source: expected a table, got integer");
  CHECK(Error("[profile]\nmatch = \"*\"\n") ==
        "t.toml:1: profile: expected an array of tables ([[profile]] sections), got table");
}

TEST_CASE("integer ranges name the key", "[stream]") {
  CHECK(Error("[store]\ncommit_ms = 0\n") == "t.toml:2: store.commit_ms: 0 is not in 1..60000");
  CHECK(Error("[store]\ncheckpoint_ms = -1\n") == "t.toml:2: store.checkpoint_ms: -1 is not in 0..3600000");
  CHECK(Error("[band]\nbreach_run = 0\n") == "t.toml:2: band.breach_run: 0 is not in 1..1000");
  CHECK(Error("[[profile]]\nperiod = 0\n") == "t.toml:2: profile[0].period: 0 is not in 1..100000");
  CHECK(Error("[refit]\nthreads = -1\n") == "t.toml:2: refit.threads: -1 is not in 0..256");
}

TEST_CASE("enum values list the accepted names", "[stream]") {
  CHECK(Error("[source]\nkind = \"pipe\"\n") ==
        "t.toml:2: source.kind: 'pipe' is not one of stdin, file, kafka, embedded");
  CHECK(Error("[source]\nformat = \"xml\"\n") == "t.toml:2: source.format: 'xml' is not one of auto, json, csv");
  CHECK(Error("[store]\nsynchronous = \"sometimes\"\n") ==
        "t.toml:2: store.synchronous: 'sometimes' is not one of off, normal, full");
  CHECK(Error("[[profile]]\npolicy = \"ignore\"\n") ==
        "t.toml:2: profile[0].policy: 'ignore' is not one of update, clip, skip");
  CHECK(Error("[[profile]]\ninterval = \"1h\"\naggregate = \"median\"\n") ==
        "t.toml:3: profile[0].aggregate: 'median' is not one of none, count, sum, mean, max, last");
  CHECK(Error("[logging]\nlevel = \"loud\"\n") ==
        "t.toml:2: logging.level: 'loud' is not one of trace, debug, info, warn, error, off");
}

TEST_CASE("file source without a path is refused", "[stream]") {
  CHECK(Error("[source]\nkind = \"file\"\n") == "t.toml:2: source.path: required when source.kind = \"file\"");
}

TEST_CASE("path with a non-file source is refused", "[stream]") {
  CHECK(Error("[source]\npath = \"x.csv\"\n") ==
        "t.toml:2: source.path: only used with source.kind = \"file\" (kind is \"stdin\")");
}

TEST_CASE("read buffer must exceed the record limit", "[stream]") {
  CHECK(Error("[source]\nmax_record_bytes = 100000\nread_buffer_bytes = 65536\n") ==
        "t.toml:3: source.read_buffer_bytes: 65536 must exceed source.max_record_bytes (100000)");
}

TEST_CASE("time window keys accept dates and refuse bad ones", "[stream]") {
  Config c = Parse("[source]\nmin_time = \"2000-01-01\"\nmax_time = 2100-01-01\n");
  CHECK(c.source.decode.min_time_ms == 946684800000);   // GNU date -u -d 2000-01-01 +%s
  CHECK(c.source.decode.max_time_ms == 4102444800000);  // GNU date -u -d 2100-01-01 +%s
  CHECK(Error("[source]\nmin_time = \"2000-13-01\"\n") ==
        "t.toml:2: source.min_time: '2000-13-01' is not an ISO-8601 date: month 13 is not in 1..12");
  CHECK(Error("[source]\nmin_time = \"2100-01-01\"\nmax_time = \"2000-01-01\"\n") ==
        "t.toml:3: source.max_time: 2000-01-01T00:00:00Z is not after source.min_time 2100-01-01T00:00:00Z");
}

TEST_CASE("kafka section reads topics, group and flattened properties sorted by name", "[stream]") {
  Config c = Parse(R"(
[source]
kind = "kafka"
[source.kafka]
topics = ["calls", "^tx-.*"]
group = "ops"
[source.kafka.properties]
bootstrap.servers = "broker:9092"
"session.timeout.ms" = 6000
enable.idempotence = true
)");
  CHECK(c.source.kind == SourceKind::kKafka);
  CHECK(c.source.kafka.topics == std::vector<std::string>{"calls", "^tx-.*"});
  CHECK(c.source.kafka.group == "ops");
  using P = std::pair<std::string, std::string>;
  CHECK(c.source.kafka.properties ==
        std::vector<P>{{"bootstrap.servers", "broker:9092"}, {"enable.idempotence", "true"}, {"session.timeout.ms", "6000"}});
}

TEST_CASE("kafka section refuses empty topics and unknown keys", "[stream]") {
  CHECK(Error("[source.kafka]\ntopics = []\n") == "t.toml:2: source.kafka.topics: needs at least one non-empty topic name");
  CHECK(Error("[source.kafka]\ngroup = \"\"\n") == "t.toml:2: source.kafka.group: must not be empty");
  CHECK(Error("[source.kafka]\ntopic = \"a\"\n") ==
        "t.toml:2: unknown key 'topic' in [source.kafka]; did you mean 'topics'?");
  CHECK(Error("[source.kafka.properties]\nx = [1]\n") ==
        "t.toml:2: source.kafka.properties.x: expected a string, number or boolean, got array");
}

TEST_CASE("bad durations name the key", "[stream]") {
  CHECK(Error("[[profile]]\ninterval = \"15x\"\n") ==
        "t.toml:2: profile[0].interval: duration '15x' has unknown unit 'x' (use ms, s, m, h, d, w)");
  CHECK(Error("[[profile]]\ninterval = 15\n") ==
        "t.toml:2: profile[0].interval: expected a duration string such as \"15m\", got integer");
  CHECK(Error("[[profile]]\ninterval = \"0s\"\n") == "t.toml:2: profile[0].interval: must be positive (or \"none\")");
  CHECK(Error("[[profile]]\nallowed_lateness = \"none\"\n") == "t.toml:2: profile[0].allowed_lateness: 'none' is not allowed here");
  CHECK(Error("[refit]\ntime_budget = \"0s\"\n") == "t.toml:2: refit.time_budget: must be positive");
}

TEST_CASE("aggregate without an interval is refused", "[stream]") {
  CHECK(Error("[[profile]]\naggregate = \"count\"\n") ==
        "t.toml:2: profile[0].aggregate: 'count' needs an interval (interval is \"none\")");
}

TEST_CASE("max gap shorter than the interval is refused", "[stream]") {
  CHECK(Error("[[profile]]\ninterval = \"1h\"\nmax_gap = \"30m\"\n") ==
        "t.toml:3: profile[0].max_gap: 30m is shorter than the interval 1h");
}

TEST_CASE("warmup must cover two seasons and fit in the history", "[stream]") {
  CHECK(Error("[[profile]]\nperiod = 24\nwarmup = 30\n") ==
        "t.toml:3: profile[0].warmup: 30 is below 2 x period (48); a seasonal fit needs two full seasons");
  CHECK(Error("[[profile]]\nhistory = 100\nwarmup = 200\n") ==
        "t.toml:3: profile[0].warmup: warmup 200 exceeds history 100");
}

TEST_CASE("bad profile match globs are refused", "[stream]") {
  CHECK(Error("[[profile]]\nmatch = \"q[1-\"\n") == "t.toml:2: profile[0].match: 'q[1-': unterminated '[' at position 1");
  CHECK(Error("[[profile]]\nmatch = \"\"\n") ==
        "t.toml:2: profile[0].match: must not be empty (use \"*\" to match every series)");
}

TEST_CASE("bad forms name the entry and the part", "[stream]") {
  CHECK(Error("[[profile]]\nforms = \"all\"\n") ==
        "t.toml:2: profile[0].forms: 'all' is not \"auto\"; give a list such as [\"ETS(A,Ad,A)\", \"ETS(M,N,M)\"]");
  CHECK(Error("[[profile]]\nforms = []\n") == "t.toml:2: profile[0].forms: is empty; use \"auto\" or list at least one form");
  CHECK_THAT(Error("[[profile]]\nforms = [\"ETS(A,N,N)\", \"ETS(A,X,N)\"]\n"), Catch::StartsWith("t.toml:2: profile[0].forms[1]: "));
  CHECK_THAT(Error("[[profile]]\nforms = [\"ETS(A,N,A)\"]\n"), Catch::StartsWith("t.toml:2: profile[0].forms[0]: "));
  CHECK(Error("[[profile]]\nforms = [\"ANN\", \"ETS(A,N,N)\"]\n") == "t.toml:2: profile[0].forms[1]: ETS(A,N,N) is listed twice");
  CHECK(Error("[[profile]]\nforms = [{error = \"additive\", trnd = \"none\"}]\n") ==
        "t.toml:2: unknown key 'trnd' in [profile[0].forms[0]]; did you mean 'trend'?");
}

TEST_CASE("breach window below the breach run is refused", "[stream]") {
  CHECK(Error("[band]\nbreach_run = 4\nbreach_window = 3\n") ==
        "t.toml:3: band.breach_window: 3 is below band.breach_run (4); use 0 for consecutive flags");
}

TEST_CASE("http listen address is checked", "[stream]") {
  CHECK(Parse("[http]\nlisten = \"\"\n").http.listen.empty());
  CHECK(Parse("[http]\nlisten = \"0.0.0.0:80\"\n").http.listen == "0.0.0.0:80");
  CHECK(Error("[http]\nlisten = \"localhost\"\n") ==
        "t.toml:2: http.listen: 'localhost' is not host:port with a port in 0..65535 (\"\" disables HTTP)");
  CHECK_THAT(Error("[http]\nlisten = \"h:99999\"\n"), Catch::StartsWith("t.toml:2: http.listen:"));
  CHECK_THAT(Error("[http]\nlisten = \"h:8a\"\n"), Catch::StartsWith("t.toml:2: http.listen:"));
}

TEST_CASE("store path must not be empty", "[stream]") {
  CHECK(Error("[store]\npath = \"\"\n") == "t.toml:2: store.path: must not be empty");
}

TEST_CASE("missing config file is an io error", "[stream]") {
  Result<Config> c = LoadConfigFile("/nonexistent/plimsoll.toml");
  REQUIRE_FALSE(c.ok());
  CHECK(c.status().code() == StatusCode::kIoError);
  CHECK(c.status().message() == "cannot read config file '/nonexistent/plimsoll.toml'");
}

TEST_CASE("shipped example config loads and states the defaults", "[stream]") {
  Result<Config> loaded = LoadConfigFile(std::string(PLIMSOLL_SOURCE_DIR) + "/config/plimsoll.toml");
  INFO(loaded.status().ToString());
  REQUIRE(loaded.ok());
  const Config& c = *loaded;
  const Config d = Parse("");
  // Every section except the example profiles must repeat the built-in defaults exactly.
  CHECK(c.source.kind == d.source.kind);
  CHECK(c.source.follow == d.source.follow);
  CHECK(c.source.decode.format == d.source.decode.format);
  CHECK(c.source.decode.max_record_bytes == d.source.decode.max_record_bytes);
  CHECK(c.source.decode.max_series_bytes == d.source.decode.max_series_bytes);
  CHECK(c.source.decode.min_time_ms == d.source.decode.min_time_ms);
  CHECK(c.source.decode.max_time_ms == d.source.decode.max_time_ms);
  CHECK(c.source.decode.broker_time_when_missing == d.source.decode.broker_time_when_missing);
  CHECK(c.source.read_buffer_bytes == d.source.read_buffer_bytes);
  CHECK(c.source.kafka.topics == d.source.kafka.topics);
  CHECK(c.source.kafka.group == d.source.kafka.group);
  CHECK(c.source.kafka.brokers == d.source.kafka.brokers);
  CHECK(c.source.kafka.partitions == d.source.kafka.partitions);
  CHECK(c.sink.flags_topic == d.sink.flags_topic);
  CHECK(c.sink.alerts_topic == d.sink.alerts_topic);
  CHECK(c.sink.models_topic == d.sink.models_topic);
  CHECK(c.sink.state_topic == d.sink.state_topic);
  CHECK(c.sink.dead_letter_topic == d.sink.dead_letter_topic);
  CHECK(c.store.path == d.store.path);
  CHECK(c.store.synchronous == d.store.synchronous);
  CHECK(c.store.commit_ms == d.store.commit_ms);
  CHECK(c.store.commit_records == d.store.commit_records);
  CHECK(c.store.checkpoint_ms == d.store.checkpoint_ms);
  CHECK(c.band.level == d.band.level);
  CHECK(c.band.breach_run == d.band.breach_run);
  CHECK(c.band.breach_window == d.band.breach_window);
  CHECK(c.band.clear_run == d.band.clear_run);
  CHECK(c.band.policy == d.band.policy);
  CHECK(c.series.create == d.series.create);
  CHECK(c.series.max_count == d.series.max_count);
  CHECK(c.refit.threads == d.refit.threads);
  CHECK(c.refit.every == d.refit.every);
  CHECK(c.refit.max_age_ms == d.refit.max_age_ms);
  CHECK(c.refit.on_alert == d.refit.on_alert);
  CHECK(c.refit.queue == d.refit.queue);
  CHECK(c.refit.time_budget_ms == d.refit.time_budget_ms);
  CHECK(c.http.listen == d.http.listen);
  CHECK(c.logging.level == d.logging.level);
  CHECK(c.logging.file == d.logging.file);
  // The last profile is the catch-all with every profile default spelled out.
  REQUIRE(c.profiles.size() >= 2);
  const ProfileOptions& last = c.profiles.back();
  const ProfileOptions& dp = d.profiles[0];
  CHECK(last.match == "*");
  CHECK(last.interval_ms == dp.interval_ms);
  CHECK(last.period == dp.period);
  CHECK(last.forms == dp.forms);
  CHECK(last.band == dp.band);
  CHECK(last.history == dp.history);
  CHECK(last.aggregate == dp.aggregate);
  CHECK(last.warmup == dp.warmup);
  CHECK(last.max_gap_ms == dp.max_gap_ms);
  CHECK(last.allowed_lateness_ms == dp.allowed_lateness_ms);
  CHECK(last.policy == dp.policy);
  CHECK(last.refit_every == dp.refit_every);
  CHECK(last.refit_max_age_ms == dp.refit_max_age_ms);
}

}  // namespace plimsoll::stream

namespace plimsoll::stream {
namespace {

TEST_CASE("the store's commit and checkpoint keys reach the daemon options", "[stream]") {
  const DaemonOptions defaults = DaemonOptionsFromConfig(Parse("[source]\nkind = \"file\"\npath = \"x.csv\"\n"));
  CHECK(defaults.commit_ms == 100);
  CHECK(defaults.commit_records == 50'000);
  CHECK(defaults.checkpoint_ms == 5'000);
  const DaemonOptions set = DaemonOptionsFromConfig(Parse(
      "[source]\nkind = \"file\"\npath = \"x.csv\"\n[store]\ncommit_ms = 250\ncommit_records = 9000\ncheckpoint_ms = 0\n"));
  CHECK(set.commit_ms == 250);
  CHECK(set.commit_records == 9'000);
  CHECK(set.checkpoint_ms == 0);  // every commit a checkpoint
}

TEST_CASE("on stdin every commit is a checkpoint, whatever checkpoint_ms says", "[stream]") {
  // Records read since a checkpoint are read again after a crash; stdin's cannot be.
  CHECK(DaemonOptionsFromConfig(Parse("")).checkpoint_ms == 0);
  CHECK(DaemonOptionsFromConfig(Parse("[store]\ncheckpoint_ms = 5000\n")).checkpoint_ms == 0);
}

}  // namespace
}  // namespace plimsoll::stream
