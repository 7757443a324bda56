#pragma once
// The daemon's configuration: a TOML file (config/plimsoll.toml is the documented example) read
// into plain Options structs. Every field's default is written at the field; LoadConfigFile and
// ParseConfig validate everything once, at start-up, and fail naming the key and line, e.g.
//   "plimsoll.toml:41: profile[2].band: 1.5 is not in (0, 1)"
//   "plimsoll.toml:3: unknown key 'sorce' in [root]; did you mean 'source'?"
// After loading, a Config is an immutable value. The full key reference is in
// /work/notes/stream-input-docs.md (merged into the README by the lead).
//
// Thread-safety: value types; a loaded Config may be read from any number of threads.

#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "plimsoll/base/status.h"
#include "plimsoll/model/spec.h"
#include "plimsoll/stream/decode.h"
#include "plimsoll/stream/rules.h"

namespace plimsoll::stream {

// [source] kind. Never renumber (may be logged or stored).
enum class SourceKind : uint8_t { kStdin = 0, kFile = 1, kKafka = 2, kEmbedded = 3 };
// [store] synchronous: SQLite's PRAGMA synchronous for the WAL database.
enum class SyncLevel : uint8_t { kOff = 0, kNormal = 1, kFull = 2 };

std::string_view SourceKindName(SourceKind kind);        // "stdin", "file", "kafka", "embedded"
std::string_view SyncLevelName(SyncLevel level);         // "off", "normal", "full"
// FlagPolicy and AggregateKind come from rules.h (the engine's compact form).
std::string_view FlagPolicyName(FlagPolicy p);           // "update", "clip", "skip"
std::string_view AggregateKindName(AggregateKind a);     // "none", "count", "sum", "mean", "max", "last"

// [source.kafka]: used when kind is "kafka" or "embedded".
struct KafkaOptions {
  std::vector<std::string> topics = {"plimsoll.observations"};  // subscribed topics ("^regex" allowed)
  std::string group = "plimsoll";  // consumer group id
  // librdkafka properties passed through verbatim, sorted by name ([source.kafka.properties];
  // nested keys are joined with '.', so bootstrap.servers may be written unquoted).
  std::vector<std::pair<std::string, std::string>> properties;
  int brokers = 1;     // embedded broker only: number of in-process brokers
  int partitions = 4;  // embedded broker only: partitions of each created topic
};

// [source]
struct SourceOptions {
  SourceKind kind = SourceKind::kStdin;
  std::string path;       // file to read; required when kind == kFile
  bool follow = false;    // file only: at end of file, wait for appended lines instead of ending
  // Record decoding: format, size limits, accepted time window (see decode.h for defaults).
  DecodeOptions decode;
  // Read size for stdin/file. Larger reads amortise syscalls; must exceed max_record_bytes.
  size_t read_buffer_bytes = size_t{1} << 20;
  KafkaOptions kafka;
};

// [sink]: output topics (kafka/embedded sources only). Empty disables that output.
struct SinkOptions {
  std::string flags_topic = "plimsoll.flags";
  std::string alerts_topic = "plimsoll.alerts";
  std::string models_topic = "plimsoll.models";   // model-change events
  std::string state_topic = "plimsoll.state";     // compact state changelog (keyed by series)
  std::string dead_letter_topic;                  // off by default: dead letters stay in SQLite
};

// [store]
struct StoreOptions {
  std::string path = "plimsoll.db";  // SQLite file (WAL mode)
  // normal: a power loss may lose the last commits but never corrupts; full: fsync per commit
  // (slower); off: the OS decides (a crash of the machine may corrupt the file).
  SyncLevel synchronous = SyncLevel::kNormal;
  int64_t commit_ms = 100;           // group commit at least this often (ms): latency vs. throughput
  int64_t commit_records = 50'000;   // ... or after this many accepted records, whichever is first
  // States and source positions are written at least this often (ms); commits in between carry
  // history, flags and alerts. Longer: less writing, more input re-read after a crash. 0: every commit.
  int64_t checkpoint_ms = 5'000;
};

// [band]: defaults for every profile.
struct BandOptions {
  double level = 0.99;     // two-sided prediction interval level, in (0, 1)
  int breach_run = 3;      // flags that raise an alert (consecutive, or within breach_window)
  int breach_window = 0;   // 0: breach_run consecutive flags; n: breach_run flags among the last n points
  int clear_run = 5;       // consecutive in-band points that clear a raised alert
  FlagPolicy policy = FlagPolicy::kClip;  // what a flagged point does to the state
};

// [series]
struct SeriesOptions {
  bool create = true;               // false: records of series not yet in the store are dead-lettered
  int64_t max_count = 1'000'000;    // series beyond this many are dead-lettered (memory bound)
};

// [[profile]]: how matching series are modelled. First match (in file order) wins.
struct ProfileOptions {
  std::string match = "*";  // glob on the series id: * any run, ? one char, [a-z] [!x] classes, \ escapes
  std::optional<int64_t> interval_ms;  // grid step (ms); nullopt ("none"): every record is a step
  int period = 1;                      // season length in steps; 1 = no season
  // Candidate forms, each with this profile's period; empty = "auto" (model::DefaultCandidates).
  // Written as notation ("ETS(M,Ad,M)", "MAdM") or {error = .., trend = .., season = ..}.
  std::vector<model::ModelSpec> forms;
  double band = 0.99;                  // interval level; defaults to [band].level
  int history = 0;                     // points kept for refits; default max(1000, 10 x period)
  AggregateKind aggregate = AggregateKind::kNone;  // needs an interval
  int warmup = 0;                      // points before the first fit; default max(20, 5 x period)
  std::optional<int64_t> max_gap_ms = int64_t{7} * 86'400'000;  // longer gaps re-seed; nullopt: never
  int64_t allowed_lateness_ms = 0;     // aggregate only: a bucket closes at its end + this
  FlagPolicy policy = FlagPolicy::kClip;  // defaults to [band].policy
  int64_t refit_every = 0;             // defaults to [refit].every
  std::optional<int64_t> refit_max_age_ms;  // defaults to [refit].max_age
  bool refit_on_alert = true;          // defaults to [refit].on_alert
  int line = 0;                        // line of the [[profile]] header (0 for the implicit one)
};

// [refit]: background refits (read by the refit module).
struct RefitOptions {
  int threads = 0;           // worker threads; 0 = cores - 1, at least 1
  int64_t every = 0;         // refit after this many new observations per series; 0 = never by count
  std::optional<int64_t> max_age_ms = int64_t{7} * 86'400'000;  // refit models older than this; nullopt: never
  bool on_alert = true;      // a raised alert triggers a refit of its series
  int queue = 10'000;        // pending refits; beyond this the least urgent (newest model) is dropped and counted
  int64_t time_budget_ms = 10'000;  // per refit; a refit over budget keeps the current model
  int max_evals = 10'000;    // likelihood evaluations per candidate form in a refit (fit's max_evaluations)
  int64_t max_lag = 10'000;  // steps a series may take while its refit runs; beyond, the result is discarded
  // First fits on the refit threads (true) or inline, stalling the input for the fit (false).
  bool background_warmup = true;
};

// [http]
struct HttpOptions {
  std::string listen = "127.0.0.1:8470";  // host:port of the HTTP API; "" disables it
};

// [logging]
struct LoggingOptions {
  std::string level = "info";  // trace | debug | info | warn | error | off
  std::string file;            // empty: stderr
};

struct Config {
  SourceOptions source;
  SinkOptions sink;
  StoreOptions store;
  BandOptions band;
  SeriesOptions series;
  // At least one. A file without [[profile]] gets one profile matching "*" with all defaults.
  std::vector<ProfileOptions> profiles;
  RefitOptions refit;
  HttpOptions http;
  LoggingOptions logging;

  // Index of the first profile whose `match` glob matches `series_id`, or -1 when none does
  // (the engine dead-letters such records). O(profiles x id length); cache per series.
  int MatchProfile(std::string_view series_id) const;
};

// Parses TOML text. `origin` prefixes messages ("plimsoll.toml:12: ..."). Fails
// (InvalidArgument) on the first syntax error, unknown key, wrong type or invalid value, naming
// it. Never throws.
Result<Config> ParseConfig(std::string_view toml_text, std::string_view origin = "config");

// Reads and parses a file; IoError when it cannot be read. Never throws.
Result<Config> LoadConfigFile(const std::string& path);

// Shell-style glob: '*' any sequence (including '/' and '.'), '?' one byte, "[abc]", "[a-z]",
// "[!x]" or "[^x]" one byte from (or not from) a set, '\' makes the next byte literal.
// REQUIRES: ValidateGlob(pattern).ok() (otherwise an unterminated class matches nothing).
bool GlobMatch(std::string_view pattern, std::string_view text);
// Fails naming the problem, e.g. "unterminated '[' at position 3".
Status ValidateGlob(std::string_view pattern);

}  // namespace plimsoll::stream
