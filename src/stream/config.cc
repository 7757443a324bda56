#include "plimsoll/stream/config.h"

#include <algorithm>
#include <cmath>
#include <fstream>
#include <sstream>
#include <toml++/toml.h>

#include "plimsoll/stream/time.h"

namespace plimsoll::stream {
namespace {

Status Bad(std::string msg) { return Status::InvalidArgument(std::move(msg)); }

size_t EditDistance(std::string_view a, std::string_view b) {
  std::vector<size_t> row(b.size() + 1);
  for (size_t j = 0; j <= b.size(); ++j) row[j] = j;
  for (size_t i = 1; i <= a.size(); ++i) {
    size_t diag = row[0];
    row[0] = i;
    for (size_t j = 1; j <= b.size(); ++j) {
      size_t up = row[j];
      row[j] = std::min({row[j] + 1, row[j - 1] + 1, diag + (a[i - 1] == b[j - 1] ? 0 : 1)});
      diag = up;
    }
  }
  return row[b.size()];
}

std::string_view TypeName(const toml::node& n) {
  switch (n.type()) {
    case toml::node_type::table: return "table";
    case toml::node_type::array: return "array";
    case toml::node_type::string: return "string";
    case toml::node_type::integer: return "integer";
    case toml::node_type::floating_point: return "float";
    case toml::node_type::boolean: return "boolean";
    case toml::node_type::date: return "date";
    case toml::node_type::time: return "time";
    case toml::node_type::date_time: return "date-time";
    default: return "nothing";
  }
}

// Reads one TOML table: rejects unknown keys, then reads typed values with ranges. Every
// message is "<origin>:<line>: <path>.<key>: <problem>".
class TableReader {
 public:
  TableReader(const toml::table* table, std::string path, std::string_view origin)
      : table_(table), path_(std::move(path)), origin_(origin) {}

  std::string_view origin() const { return origin_; }

  Status CheckKeys(std::initializer_list<std::string_view> known) const {
    if (table_ == nullptr) return Status::Ok();
    for (auto&& [key, node] : *table_) {
      const std::string_view k = key.str();
      if (std::find(known.begin(), known.end(), k) != known.end()) continue;
      std::string msg = "unknown key '" + std::string(k) + "' in [" + (path_.empty() ? "root" : path_) + "]";
      std::string_view best;
      size_t best_d = std::max<size_t>(2, k.size() / 3) + 1;
      for (std::string_view cand : known) {
        size_t d = EditDistance(k, cand);
        if (d < best_d) best_d = d, best = cand;
      }
      if (!best.empty()) msg += "; did you mean '" + std::string(best) + "'?";
      return Bad(Where(&node) + msg);
    }
    return Status::Ok();
  }

  const toml::node* Get(std::string_view key) const { return table_ == nullptr ? nullptr : table_->get(key); }

  // "origin:line: " for a node (or the table when the node is null).
  std::string Where(const toml::node* n) const {
    if (n == nullptr) n = table_;
    std::string out(origin_);
    if (n != nullptr && n->source().begin.line > 0) out += ":" + std::to_string(n->source().begin.line);
    return out + ": ";
  }
  std::string Key(std::string_view key) const { return path_.empty() ? std::string(key) : path_ + "." + std::string(key); }
  Status Error(std::string_view key, std::string_view problem) const {
    return Bad(Where(Get(key)) + Key(key) + ": " + std::string(problem));
  }
  Status TypeError(std::string_view key, std::string_view expected) const {
    return Error(key, "expected " + std::string(expected) + ", got " + std::string(TypeName(*Get(key))));
  }

  Status Int(std::string_view key, int64_t& out, int64_t lo, int64_t hi) const {
    const toml::node* n = Get(key);
    if (n == nullptr) return Status::Ok();
    if (!n->is_integer()) return TypeError(key, "an integer");
    const int64_t v = n->as_integer()->get();
    if (v < lo || v > hi) {
      return Error(key, std::to_string(v) + " is not in " + std::to_string(lo) + ".." + std::to_string(hi));
    }
    out = v;
    return Status::Ok();
  }
  template <typename T>
  Status Int(std::string_view key, T& out, int64_t lo, int64_t hi) const {
    int64_t v = static_cast<int64_t>(out);
    PLIMSOLL_RETURN_IF_ERROR(Int(key, v, lo, hi));
    out = static_cast<T>(v);
    return Status::Ok();
  }

  // A level strictly inside (0, 1).
  Status Level(std::string_view key, double& out) const {
    const toml::node* n = Get(key);
    if (n == nullptr) return Status::Ok();
    double v = 0;
    if (n->is_floating_point()) v = n->as_floating_point()->get();
    else if (n->is_integer()) v = static_cast<double>(n->as_integer()->get());
    else return TypeError(key, "a number");
    if (!(v > 0.0 && v < 1.0)) {
      std::ostringstream s;
      s << v << " is not in (0, 1)";
      return Error(key, s.str());
    }
    out = v;
    return Status::Ok();
  }

  Status Bool(std::string_view key, bool& out) const {
    const toml::node* n = Get(key);
    if (n == nullptr) return Status::Ok();
    if (!n->is_boolean()) return TypeError(key, "true or false");
    out = n->as_boolean()->get();
    return Status::Ok();
  }

  Status String(std::string_view key, std::string& out) const {
    const toml::node* n = Get(key);
    if (n == nullptr) return Status::Ok();
    if (!n->is_string()) return TypeError(key, "a string");
    out = n->as_string()->get();
    return Status::Ok();
  }

  // A duration string ("15m", "none"); `allow_none` false refuses "none".
  Status Duration(std::string_view key, std::optional<int64_t>& out, bool allow_none) const {
    const toml::node* n = Get(key);
    if (n == nullptr) return Status::Ok();
    if (!n->is_string()) return TypeError(key, "a duration string such as \"15m\"");
    Result<std::optional<int64_t>> d = ParseDuration(n->as_string()->get());
    if (!d.ok()) return Error(key, d.status().message());
    if (!d->has_value() && !allow_none) return Error(key, "'none' is not allowed here");
    out = *d;
    return Status::Ok();
  }
  Status Duration(std::string_view key, int64_t& out) const {
    std::optional<int64_t> v = out;
    PLIMSOLL_RETURN_IF_ERROR(Duration(key, v, /*allow_none=*/false));
    out = *v;
    return Status::Ok();
  }

  // A string from a fixed set of names; `names[i]` maps to enum value i.
  template <typename E, size_t N>
  Status Enum(std::string_view key, E& out, const std::string_view (&names)[N]) const {
    const toml::node* n = Get(key);
    if (n == nullptr) return Status::Ok();
    if (!n->is_string()) return TypeError(key, "a string");
    const std::string_view v = n->as_string()->get();
    for (size_t i = 0; i < N; ++i) {
      if (names[i] == v) {
        out = static_cast<E>(i);
        return Status::Ok();
      }
    }
    std::string list;
    for (size_t i = 0; i < N; ++i) list += (i ? ", " : "") + std::string(names[i]);
    return Error(key, "'" + std::string(v) + "' is not one of " + list);
  }

  // A sub-table (absent is fine); fails when the key holds something else.
  Status Table(std::string_view key, const toml::table*& out) const {
    out = nullptr;
    const toml::node* n = Get(key);
    if (n == nullptr) return Status::Ok();
    if (!n->is_table()) return TypeError(key, "a table");
    out = n->as_table();
    return Status::Ok();
  }

 private:
  const toml::table* table_;
  std::string path_;
  std::string_view origin_;
};

constexpr std::string_view kSourceKinds[] = {"stdin", "file", "kafka", "embedded"};
constexpr std::string_view kFormats[] = {"auto", "json", "csv"};
constexpr std::string_view kSyncLevels[] = {"off", "normal", "full"};
constexpr std::string_view kPolicies[] = {"update", "clip", "skip"};
constexpr std::string_view kAggregates[] = {"none", "count", "sum", "mean", "max", "last"};
constexpr std::string_view kLogLevels[] = {"trace", "debug", "info", "warn", "error", "off"};

constexpr int64_t kMaxCount = 1'000'000'000;

// Flattens [source.kafka.properties] into "a.b.c" = "value" pairs (toml++ iterates keys sorted).
Status ReadProperties(const TableReader& r, const toml::table& t, const std::string& prefix,
                      std::vector<std::pair<std::string, std::string>>& out) {
  for (auto&& [key, node] : t) {
    const std::string name = prefix.empty() ? std::string(key.str()) : prefix + "." + std::string(key.str());
    if (node.is_table()) {
      PLIMSOLL_RETURN_IF_ERROR(ReadProperties(r, *node.as_table(), name, out));
    } else if (node.is_string()) {
      out.emplace_back(name, node.as_string()->get());
    } else if (node.is_integer()) {
      out.emplace_back(name, std::to_string(node.as_integer()->get()));
    } else if (node.is_boolean()) {
      out.emplace_back(name, node.as_boolean()->get() ? "true" : "false");
    } else if (node.is_floating_point()) {
      std::ostringstream s;
      s << node.as_floating_point()->get();
      out.emplace_back(name, s.str());
    } else {
      return Bad(r.Where(&node) + "source.kafka.properties." + name + ": expected a string, number or boolean, got " +
                 std::string(TypeName(node)));
    }
  }
  return Status::Ok();
}

Status ReadStringList(const TableReader& r, std::string_view key, std::vector<std::string>& out) {
  const toml::node* n = r.Get(key);
  if (n == nullptr) return Status::Ok();
  if (n->is_string()) {
    out = {std::string(n->as_string()->get())};
    return Status::Ok();
  }
  if (!n->is_array()) return r.TypeError(key, "a string or an array of strings");
  out.clear();
  for (const toml::node& e : *n->as_array()) {
    if (!e.is_string()) return r.Error(key, "expected an array of strings, found a " + std::string(TypeName(e)));
    out.emplace_back(e.as_string()->get());
  }
  return Status::Ok();
}

Status ReadTime(const TableReader& r, std::string_view key, int64_t& out) {
  const toml::node* n = r.Get(key);
  if (n == nullptr) return Status::Ok();
  if (n->is_date()) {  // an unquoted TOML date
    const toml::date d = n->as_date()->get();
    out = DaysFromCivil(d.year, d.month, d.day) * 86'400'000;
    return Status::Ok();
  }
  if (!n->is_string()) return r.TypeError(key, "an ISO-8601 date such as \"1970-01-01\"");
  const std::string text(n->as_string()->get());
  Result<int64_t> ms = ParseIsoTime(text);
  if (!ms.ok()) return r.Error(key, "'" + text + "' is not an ISO-8601 date: " + ms.status().message());
  out = *ms;
  return Status::Ok();
}

Status ReadSource(const TableReader& r, SourceOptions& s) {
  PLIMSOLL_RETURN_IF_ERROR(r.CheckKeys({"kind", "path", "follow", "format", "max_record_bytes", "max_series_bytes",
                                        "min_time", "max_time", "broker_time_when_missing", "read_buffer_bytes",
                                        "kafka"}));
  PLIMSOLL_RETURN_IF_ERROR(r.Enum("kind", s.kind, kSourceKinds));
  PLIMSOLL_RETURN_IF_ERROR(r.String("path", s.path));
  PLIMSOLL_RETURN_IF_ERROR(r.Bool("follow", s.follow));
  PLIMSOLL_RETURN_IF_ERROR(r.Enum("format", s.decode.format, kFormats));
  PLIMSOLL_RETURN_IF_ERROR(r.Int("max_record_bytes", s.decode.max_record_bytes, 16, int64_t{1} << 26));
  PLIMSOLL_RETURN_IF_ERROR(r.Int("max_series_bytes", s.decode.max_series_bytes, 1, 4096));
  PLIMSOLL_RETURN_IF_ERROR(ReadTime(r, "min_time", s.decode.min_time_ms));
  PLIMSOLL_RETURN_IF_ERROR(ReadTime(r, "max_time", s.decode.max_time_ms));
  PLIMSOLL_RETURN_IF_ERROR(r.Bool("broker_time_when_missing", s.decode.broker_time_when_missing));
  PLIMSOLL_RETURN_IF_ERROR(r.Int("read_buffer_bytes", s.read_buffer_bytes, 4096, int64_t{1} << 30));
  if (s.decode.min_time_ms >= s.decode.max_time_ms) {
    return r.Error("max_time", FormatIsoTime(s.decode.max_time_ms) + " is not after source.min_time " +
                                   FormatIsoTime(s.decode.min_time_ms));
  }
  if (s.read_buffer_bytes <= s.decode.max_record_bytes) {
    return r.Error("read_buffer_bytes", std::to_string(s.read_buffer_bytes) +
                                            " must exceed source.max_record_bytes (" +
                                            std::to_string(s.decode.max_record_bytes) + ")");
  }
  if (s.kind == SourceKind::kFile && s.path.empty()) {
    return Bad(r.Where(r.Get("kind")) + "source.path: required when source.kind = \"file\"");
  }
  if (s.kind != SourceKind::kFile && r.Get("path") != nullptr) {
    return r.Error("path", "only used with source.kind = \"file\" (kind is \"" +
                               std::string(SourceKindName(s.kind)) + "\")");
  }
  const toml::table* kafka = nullptr;
  PLIMSOLL_RETURN_IF_ERROR(r.Table("kafka", kafka));
  TableReader kr(kafka, "source.kafka", r.origin());
  PLIMSOLL_RETURN_IF_ERROR(kr.CheckKeys({"topics", "group", "brokers", "partitions", "properties"}));
  PLIMSOLL_RETURN_IF_ERROR(ReadStringList(kr, "topics", s.kafka.topics));
  PLIMSOLL_RETURN_IF_ERROR(kr.String("group", s.kafka.group));
  PLIMSOLL_RETURN_IF_ERROR(kr.Int("brokers", s.kafka.brokers, 1, 16));
  PLIMSOLL_RETURN_IF_ERROR(kr.Int("partitions", s.kafka.partitions, 1, 1024));
  const toml::table* props = nullptr;
  PLIMSOLL_RETURN_IF_ERROR(kr.Table("properties", props));
  if (props != nullptr) PLIMSOLL_RETURN_IF_ERROR(ReadProperties(kr, *props, "", s.kafka.properties));
  if (s.kafka.topics.empty() || std::any_of(s.kafka.topics.begin(), s.kafka.topics.end(),
                                            [](const std::string& t) { return t.empty(); })) {
    return kr.Error("topics", "needs at least one non-empty topic name");
  }
  if (s.kafka.group.empty()) return kr.Error("group", "must not be empty");
  return Status::Ok();
}

Status ReadForms(const TableReader& r, int period, std::vector<model::ModelSpec>& out) {
  const toml::node* n = r.Get("forms");
  if (n == nullptr) return Status::Ok();
  if (n->is_string()) {
    if (n->as_string()->get() == "auto") return Status::Ok();
    return r.Error("forms", "'" + std::string(n->as_string()->get()) +
                                "' is not \"auto\"; give a list such as [\"ETS(A,Ad,A)\", \"ETS(M,N,M)\"]");
  }
  if (!n->is_array()) return r.TypeError("forms", "\"auto\" or an array of forms");
  const toml::array& arr = *n->as_array();
  if (arr.empty()) return r.Error("forms", "is empty; use \"auto\" or list at least one form");
  for (size_t i = 0; i < arr.size(); ++i) {
    const toml::node& e = arr[i];
    const std::string key = r.Key("forms[" + std::to_string(i) + "]");
    Result<model::ModelSpec> spec = Status::InvalidArgument("unset");
    if (e.is_string()) {
      spec = model::ParseModelSpec(e.as_string()->get(), period);
    } else if (e.is_table()) {
      TableReader t(e.as_table(), key, r.origin());
      PLIMSOLL_RETURN_IF_ERROR(t.CheckKeys({"error", "trend", "season"}));
      std::string error = "additive", trend = "none", season = period > 1 ? "additive" : "none";
      PLIMSOLL_RETURN_IF_ERROR(t.String("error", error));
      PLIMSOLL_RETURN_IF_ERROR(t.String("trend", trend));
      PLIMSOLL_RETURN_IF_ERROR(t.String("season", season));
      spec = model::ParseSpelledModelSpec(error, trend, season, period);
    } else {
      return Bad(r.Where(&e) + key + ": expected a string or a table, got " + std::string(TypeName(e)));
    }
    if (!spec.ok()) return Bad(r.Where(&e) + key + ": " + spec.status().message());
    if (std::find(out.begin(), out.end(), *spec) != out.end()) {
      return Bad(r.Where(&e) + key + ": " + spec->Notation() + " is listed twice");
    }
    out.push_back(*spec);
  }
  return Status::Ok();
}

Status ReadProfile(const TableReader& r, const Config& c, ProfileOptions& p) {
  PLIMSOLL_RETURN_IF_ERROR(r.CheckKeys({"match", "interval", "period", "forms", "band", "history", "aggregate",
                                        "warmup", "max_gap", "allowed_lateness", "policy", "refit_every",
                                        "refit_max_age", "refit_on_alert"}));
  p.band = c.band.level;
  p.policy = c.band.policy;
  p.refit_every = c.refit.every;
  p.refit_max_age_ms = c.refit.max_age_ms;
  p.refit_on_alert = c.refit.on_alert;
  PLIMSOLL_RETURN_IF_ERROR(r.String("match", p.match));
  if (p.match.empty()) return r.Error("match", "must not be empty (use \"*\" to match every series)");
  if (Status s = ValidateGlob(p.match); !s.ok()) return r.Error("match", "'" + p.match + "': " + s.message());
  PLIMSOLL_RETURN_IF_ERROR(r.Duration("interval", p.interval_ms, /*allow_none=*/true));
  if (p.interval_ms && *p.interval_ms <= 0) return r.Error("interval", "must be positive (or \"none\")");
  PLIMSOLL_RETURN_IF_ERROR(r.Int("period", p.period, 1, 100'000));
  PLIMSOLL_RETURN_IF_ERROR(ReadForms(r, p.period, p.forms));
  PLIMSOLL_RETURN_IF_ERROR(r.Level("band", p.band));
  p.history = std::max(1000, 10 * p.period);
  p.warmup = std::max(20, 5 * p.period);  // 3 periods left alpha at its bound on drifting levels
  PLIMSOLL_RETURN_IF_ERROR(r.Int("history", p.history, 10, 10'000'000));
  PLIMSOLL_RETURN_IF_ERROR(r.Int("warmup", p.warmup, 3, 10'000'000));
  if (p.period > 1 && p.warmup < 2 * p.period) {
    return r.Error("warmup", std::to_string(p.warmup) + " is below 2 x period (" + std::to_string(2 * p.period) +
                                 "); a seasonal fit needs two full seasons");
  }
  if (p.warmup > p.history) {
    return r.Error(r.Get("warmup") ? "warmup" : "history",
                   "warmup " + std::to_string(p.warmup) + " exceeds history " + std::to_string(p.history));
  }
  PLIMSOLL_RETURN_IF_ERROR(r.Enum("aggregate", p.aggregate, kAggregates));
  if (p.aggregate != AggregateKind::kNone && !p.interval_ms) {
    return r.Error("aggregate", "'" + std::string(AggregateKindName(p.aggregate)) +
                                    "' needs an interval (interval is \"none\")");
  }
  PLIMSOLL_RETURN_IF_ERROR(r.Duration("max_gap", p.max_gap_ms, /*allow_none=*/true));
  if (p.max_gap_ms && p.interval_ms && *p.max_gap_ms < *p.interval_ms) {
    return r.Error("max_gap", FormatDuration(*p.max_gap_ms) + " is shorter than the interval " +
                                  FormatDuration(*p.interval_ms));
  }
  PLIMSOLL_RETURN_IF_ERROR(r.Duration("allowed_lateness", p.allowed_lateness_ms));
  PLIMSOLL_RETURN_IF_ERROR(r.Enum("policy", p.policy, kPolicies));
  PLIMSOLL_RETURN_IF_ERROR(r.Int("refit_every", p.refit_every, 0, kMaxCount));
  PLIMSOLL_RETURN_IF_ERROR(r.Duration("refit_max_age", p.refit_max_age_ms, /*allow_none=*/true));
  PLIMSOLL_RETURN_IF_ERROR(r.Bool("refit_on_alert", p.refit_on_alert));
  return Status::Ok();
}

Status ReadHttp(const TableReader& r, HttpOptions& h) {
  PLIMSOLL_RETURN_IF_ERROR(r.CheckKeys({"listen"}));
  PLIMSOLL_RETURN_IF_ERROR(r.String("listen", h.listen));
  if (h.listen.empty()) return Status::Ok();
  const size_t colon = h.listen.rfind(':');
  int64_t port = -1;
  if (colon != std::string::npos && colon + 1 < h.listen.size() && colon + 6 >= h.listen.size()) {
    port = 0;
    for (size_t i = colon + 1; i < h.listen.size(); ++i) {
      if (h.listen[i] < '0' || h.listen[i] > '9') port = -1 - 65536;
      port = port * 10 + (h.listen[i] - '0');
    }
  }
  if (colon == std::string::npos || colon == 0 || port < 0 || port > 65535) {
    return r.Error("listen", "'" + h.listen + "' is not host:port with a port in 0..65535 (\"\" disables HTTP)");
  }
  return Status::Ok();
}

Result<Config> Build(const toml::table& root, std::string_view origin) {
  Config c;
  TableReader top(&root, "", origin);
  PLIMSOLL_RETURN_IF_ERROR(top.CheckKeys(
      {"source", "sink", "store", "band", "series", "profile", "refit", "http", "logging"}));
  auto section = [&](std::string_view name, const toml::table*& t) { return top.Table(name, t); };
  const toml::table* t = nullptr;

  PLIMSOLL_RETURN_IF_ERROR(section("source", t));
  PLIMSOLL_RETURN_IF_ERROR(ReadSource(TableReader(t, "source", origin), c.source));

  PLIMSOLL_RETURN_IF_ERROR(section("sink", t));
  {
    TableReader r(t, "sink", origin);
    PLIMSOLL_RETURN_IF_ERROR(
        r.CheckKeys({"flags_topic", "alerts_topic", "models_topic", "state_topic", "dead_letter_topic"}));
    PLIMSOLL_RETURN_IF_ERROR(r.String("flags_topic", c.sink.flags_topic));
    PLIMSOLL_RETURN_IF_ERROR(r.String("alerts_topic", c.sink.alerts_topic));
    PLIMSOLL_RETURN_IF_ERROR(r.String("models_topic", c.sink.models_topic));
    PLIMSOLL_RETURN_IF_ERROR(r.String("state_topic", c.sink.state_topic));
    PLIMSOLL_RETURN_IF_ERROR(r.String("dead_letter_topic", c.sink.dead_letter_topic));
  }

  PLIMSOLL_RETURN_IF_ERROR(section("store", t));
  {
    TableReader r(t, "store", origin);
    PLIMSOLL_RETURN_IF_ERROR(r.CheckKeys({"path", "synchronous", "commit_ms", "commit_records", "checkpoint_ms"}));
    PLIMSOLL_RETURN_IF_ERROR(r.String("path", c.store.path));
    if (c.store.path.empty()) return r.Error("path", "must not be empty");
    PLIMSOLL_RETURN_IF_ERROR(r.Enum("synchronous", c.store.synchronous, kSyncLevels));
    PLIMSOLL_RETURN_IF_ERROR(r.Int("commit_ms", c.store.commit_ms, 1, 60'000));
    PLIMSOLL_RETURN_IF_ERROR(r.Int("commit_records", c.store.commit_records, 1, 10'000'000));
    PLIMSOLL_RETURN_IF_ERROR(r.Int("checkpoint_ms", c.store.checkpoint_ms, 0, 3'600'000));
  }

  PLIMSOLL_RETURN_IF_ERROR(section("band", t));
  {
    TableReader r(t, "band", origin);
    PLIMSOLL_RETURN_IF_ERROR(r.CheckKeys({"level", "breach_run", "breach_window", "clear_run", "policy"}));
    PLIMSOLL_RETURN_IF_ERROR(r.Level("level", c.band.level));
    PLIMSOLL_RETURN_IF_ERROR(r.Int("breach_run", c.band.breach_run, 1, 1000));
    PLIMSOLL_RETURN_IF_ERROR(r.Int("breach_window", c.band.breach_window, 0, 1000));
    PLIMSOLL_RETURN_IF_ERROR(r.Int("clear_run", c.band.clear_run, 1, 1000));
    PLIMSOLL_RETURN_IF_ERROR(r.Enum("policy", c.band.policy, kPolicies));
    if (c.band.breach_window != 0 && c.band.breach_window < c.band.breach_run) {
      return r.Error("breach_window", std::to_string(c.band.breach_window) + " is below band.breach_run (" +
                                          std::to_string(c.band.breach_run) + "); use 0 for consecutive flags");
    }
  }

  PLIMSOLL_RETURN_IF_ERROR(section("series", t));
  {
    TableReader r(t, "series", origin);
    PLIMSOLL_RETURN_IF_ERROR(r.CheckKeys({"create", "max_count"}));
    PLIMSOLL_RETURN_IF_ERROR(r.Bool("create", c.series.create));
    PLIMSOLL_RETURN_IF_ERROR(r.Int("max_count", c.series.max_count, 1, kMaxCount));
  }

  // [refit] before the profiles: they inherit its every/max_age.
  PLIMSOLL_RETURN_IF_ERROR(section("refit", t));
  {
    TableReader r(t, "refit", origin);
    PLIMSOLL_RETURN_IF_ERROR(r.CheckKeys({"threads", "every", "max_age", "on_alert", "queue", "time_budget",
                                          "max_evals", "max_lag", "background_warmup"}));
    PLIMSOLL_RETURN_IF_ERROR(r.Int("threads", c.refit.threads, 0, 256));
    PLIMSOLL_RETURN_IF_ERROR(r.Int("every", c.refit.every, 0, kMaxCount));
    PLIMSOLL_RETURN_IF_ERROR(r.Duration("max_age", c.refit.max_age_ms, /*allow_none=*/true));
    PLIMSOLL_RETURN_IF_ERROR(r.Bool("on_alert", c.refit.on_alert));
    PLIMSOLL_RETURN_IF_ERROR(r.Int("queue", c.refit.queue, 1, 10'000'000));
    PLIMSOLL_RETURN_IF_ERROR(r.Duration("time_budget", c.refit.time_budget_ms));
    if (c.refit.time_budget_ms <= 0) return r.Error("time_budget", "must be positive");
    PLIMSOLL_RETURN_IF_ERROR(r.Int("max_evals", c.refit.max_evals, 10, 10'000'000));
    PLIMSOLL_RETURN_IF_ERROR(r.Int("max_lag", c.refit.max_lag, 1, kMaxCount));
    PLIMSOLL_RETURN_IF_ERROR(r.Bool("background_warmup", c.refit.background_warmup));
  }

  if (const toml::node* profiles = root.get("profile")) {
    if (!profiles->is_array_of_tables()) {
      return top.TypeError("profile", "an array of tables ([[profile]] sections)");
    }
    const toml::array& arr = *profiles->as_array();
    for (size_t i = 0; i < arr.size(); ++i) {
      ProfileOptions p;
      p.line = static_cast<int>(arr[i].source().begin.line);
      PLIMSOLL_RETURN_IF_ERROR(
          ReadProfile(TableReader(arr[i].as_table(), "profile[" + std::to_string(i) + "]", origin), c, p));
      c.profiles.push_back(std::move(p));
    }
  } else {
    ProfileOptions p;
    PLIMSOLL_RETURN_IF_ERROR(ReadProfile(TableReader(nullptr, "profile[0]", origin), c, p));
    c.profiles.push_back(std::move(p));
  }

  PLIMSOLL_RETURN_IF_ERROR(section("http", t));
  PLIMSOLL_RETURN_IF_ERROR(ReadHttp(TableReader(t, "http", origin), c.http));

  PLIMSOLL_RETURN_IF_ERROR(section("logging", t));
  {
    TableReader r(t, "logging", origin);
    PLIMSOLL_RETURN_IF_ERROR(r.CheckKeys({"level", "file"}));
    size_t level = 2;
    PLIMSOLL_RETURN_IF_ERROR(r.Enum("level", level, kLogLevels));
    c.logging.level = kLogLevels[level];
    PLIMSOLL_RETURN_IF_ERROR(r.String("file", c.logging.file));
  }
  return c;
}

}  // namespace

std::string_view SourceKindName(SourceKind kind) { return kSourceKinds[static_cast<size_t>(kind)]; }
std::string_view SyncLevelName(SyncLevel level) { return kSyncLevels[static_cast<size_t>(level)]; }
std::string_view FlagPolicyName(FlagPolicy p) { return kPolicies[static_cast<size_t>(p)]; }
std::string_view AggregateKindName(AggregateKind a) { return kAggregates[static_cast<size_t>(a)]; }

int Config::MatchProfile(std::string_view series_id) const {
  for (size_t i = 0; i < profiles.size(); ++i) {
    if (GlobMatch(profiles[i].match, series_id)) return static_cast<int>(i);
  }
  return -1;
}

Result<Config> ParseConfig(std::string_view toml_text, std::string_view origin) {
  toml::table root;
  try {
    root = toml::parse(toml_text, origin);
  } catch (const toml::parse_error& e) {
    return Bad(std::string(origin) + ":" + std::to_string(e.source().begin.line) + ": TOML syntax: " +
               std::string(e.description()));
  } catch (const std::exception& e) {
    return Bad(std::string(origin) + ": TOML syntax: " + e.what());
  }
  return Build(root, origin);
}

Result<Config> LoadConfigFile(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return Status::IoError("cannot read config file '" + path + "'");
  std::ostringstream text;
  text << in.rdbuf();
  if (in.bad()) return Status::IoError("error reading config file '" + path + "'");
  return ParseConfig(text.str(), path);
}

Status ValidateGlob(std::string_view p) {
  for (size_t i = 0; i < p.size(); ++i) {
    if (p[i] == '\\') {
      if (i + 1 == p.size()) return Bad("trailing '\\' escapes nothing");
      ++i;
    } else if (p[i] == '[') {
      size_t j = i + 1;
      if (j < p.size() && (p[j] == '!' || p[j] == '^')) ++j;
      if (j < p.size() && p[j] == ']') ++j;  // a leading ']' is literal
      while (j < p.size() && p[j] != ']') ++j;
      if (j == p.size()) return Bad("unterminated '[' at position " + std::to_string(i));
      i = j;
    }
  }
  return Status::Ok();
}

namespace {

// Matches one class "[...]" starting at p[i] against c; sets `next` to the index after ']'.
// Returns false (and next = npos) for an unterminated class.
bool MatchClass(std::string_view p, size_t i, char c, size_t& next) {
  size_t j = i + 1;
  bool negate = false;
  if (j < p.size() && (p[j] == '!' || p[j] == '^')) negate = true, ++j;
  bool hit = false;
  bool first = true;
  while (j < p.size() && (p[j] != ']' || first)) {
    first = false;
    char lo = p[j];
    if (lo == '\\' && j + 1 < p.size()) lo = p[++j];
    char hi = lo;
    if (j + 2 < p.size() && p[j + 1] == '-' && p[j + 2] != ']') {
      hi = p[j + 2];
      if (hi == '\\' && j + 3 < p.size()) hi = p[++j + 2];
      j += 2;
    }
    if (static_cast<unsigned char>(c) >= static_cast<unsigned char>(lo) &&
        static_cast<unsigned char>(c) <= static_cast<unsigned char>(hi)) {
      hit = true;
    }
    ++j;
  }
  if (j >= p.size()) {
    next = std::string_view::npos;
    return false;
  }
  next = j + 1;
  return hit != negate;
}

}  // namespace

bool GlobMatch(std::string_view p, std::string_view s) {
  // Classic single-backtrack matcher: on mismatch, retry from the last '*' one byte further.
  size_t pi = 0, si = 0;
  size_t star_p = std::string_view::npos, star_s = 0;
  while (si < s.size()) {
    if (pi < p.size()) {
      const char pc = p[pi];
      if (pc == '*') {
        star_p = pi++;
        star_s = si;
        continue;
      }
      if (pc == '?') {
        ++pi, ++si;
        continue;
      }
      if (pc == '[') {
        size_t next = 0;
        if (MatchClass(p, pi, s[si], next)) {
          pi = next, ++si;
          continue;
        }
        if (next == std::string_view::npos) return false;
      } else {
        char lit = pc;
        size_t adv = 1;
        if (pc == '\\' && pi + 1 < p.size()) lit = p[pi + 1], adv = 2;
        if (lit == s[si]) {
          pi += adv, ++si;
          continue;
        }
      }
    }
    if (star_p == std::string_view::npos) return false;
    pi = star_p + 1;
    si = ++star_s;
  }
  while (pi < p.size() && p[pi] == '*') ++pi;
  return pi == p.size();
}

}  // namespace plimsoll::stream
