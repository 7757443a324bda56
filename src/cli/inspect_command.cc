// `plimsoll inspect`: reads the store (read-only, safe while `watch` runs). Without a series:
// one line per series. With one: its model, state, recent flags, alerts and events. `--rejects`
// lists dead letters. Text tables or --json.
#include <CLI/CLI.hpp>
#include <cmath>
#include <cstdio>
#include <iostream>
#include <string>

#include "cli/commands.h"
#include "cli/daemon_setup.h"
#include "plimsoll/base/json_writer.h"
#include "plimsoll/store/store.h"
#include "plimsoll/stream/engine.h"
#include "plimsoll/stream/time.h"

namespace plimsoll::cli {
namespace {

struct InspectFlags {
  std::string config;
  std::string store;
  std::string series;
  bool json = false;
  bool rejects = false;
  size_t limit = 20;
};

std::string Num(double v) {
  if (std::isnan(v)) return "-";
  char buf[32];
  std::snprintf(buf, sizeof(buf), "%.6g", v);
  return buf;
}

void WriteOptional(JsonWriter& w, std::string_view key, double v) {
  if (!std::isnan(v)) w.Field(key, v);
}

int ListSeries(store::Store& store, const InspectFlags& flags) {
  Result<std::vector<store::StoredSeries>> list = store.ListSeries(flags.limit);
  if (!list.ok()) {
    std::cerr << "plimsoll inspect: " << list.status().ToString() << "\n";
    return 1;
  }
  if (flags.json) {
    JsonWriter w;
    w.BeginArray();
    for (const store::StoredSeries& s : *list) {
      w.BeginObject().Field("series", s.series.name).Field("profile", s.series.profile);
      if (s.model) w.Field("form", s.model->spec);
      if (s.state) w.Field("last_step", s.state->step).Field("last_time", stream::FormatIsoTime(s.state->time_ms));
      w.EndObject();
    }
    w.EndArray();
    std::cout << w.str() << "\n";
    return 0;
  }
  std::printf("%-32s %-16s %-14s %12s  %s\n", "series", "profile", "form", "last step", "last time");
  for (const store::StoredSeries& s : *list) {
    std::printf("%-32s %-16s %-14s %12s  %s\n", s.series.name.c_str(), s.series.profile.c_str(),
                s.model ? s.model->spec.c_str() : "(warming up)",
                s.state ? std::to_string(s.state->step).c_str() : "-",
                s.state ? stream::FormatIsoTime(s.state->time_ms).c_str() : "-");
  }
  if (list->size() == flags.limit) std::printf("(first %zu; raise --limit for more)\n", flags.limit);
  return 0;
}

int ShowRejects(store::Store& store, const InspectFlags& flags) {
  Result<std::vector<store::StoredDeadLetter>> rejects = store.RecentDeadLetters(flags.limit);
  if (!rejects.ok()) {
    std::cerr << "plimsoll inspect: " << rejects.status().ToString() << "\n";
    return 1;
  }
  JsonWriter w;
  w.BeginArray();
  for (const store::StoredDeadLetter& d : *rejects) {
    const store::DeadLetterRecord& r = d.record;
    if (flags.json) {
      w.BeginObject().Field("id", d.id).Field("received", stream::FormatIsoTime(r.received_ms));
      w.Field("stream", r.stream).Field("partition", r.partition).Field("offset", r.offset);
      w.Field("reason", r.reason).Field("raw", r.raw).Field("raw_bytes", d.raw_size).EndObject();
    } else {
      std::printf("#%lld %s %s[%d]@%lld: %s\n    %s\n", static_cast<long long>(d.id),
                  stream::FormatIsoTime(r.received_ms).c_str(), r.stream.c_str(), r.partition,
                  static_cast<long long>(r.offset), r.reason.c_str(), r.raw.c_str());
    }
  }
  w.EndArray();
  if (flags.json) std::cout << w.str() << "\n";
  return 0;
}

int ShowSeries(store::Store& store, const InspectFlags& flags) {
  Result<store::StoredSeries> series = store.GetSeries(flags.series);
  Result<std::vector<store::FlagRecord>> recent = store.RecentFlags(flags.series, flags.limit);
  Result<std::vector<store::AlertRecord>> alerts = store.RecentAlerts(flags.series, flags.limit);
  Result<std::vector<store::EventRecord>> events = store.RecentEvents(flags.series, flags.limit);
  for (const Status& s : {series.status(), recent.status(), alerts.status(), events.status()}) {
    if (!s.ok()) {
      std::cerr << "plimsoll inspect: " << s.ToString() << "\n";
      return 1;
    }
  }
  std::optional<stream::CheckpointView> view;
  if (series->state) {
    Result<stream::CheckpointView> decoded = stream::DecodeCheckpoint(series->state->encoded);
    if (!decoded.ok()) {
      std::cerr << "plimsoll inspect: series '" << flags.series << "': " << decoded.status().ToString() << "\n";
      return 1;
    }
    view = std::move(decoded).value();
  }
  const store::ModelRecord* m = series->model ? &*series->model : nullptr;
  if (flags.json) {
    JsonWriter w;
    w.BeginObject().Field("series", series->series.name).Field("profile", series->series.profile);
    if (m) {
      w.Key("model").BeginObject().Field("form", m->spec).Field("period", m->period);
      WriteOptional(w, "alpha", m->alpha);
      WriteOptional(w, "beta", m->beta);
      WriteOptional(w, "gamma", m->gamma);
      WriteOptional(w, "phi", m->phi);
      w.Field("sigma2", m->sigma2).Field("loglik", m->loglik).Field("aicc", m->aicc);
      w.Field("fitted", stream::FormatIsoTime(m->fitted_ms)).Field("reason", m->reason).EndObject();
    }
    if (view) {
      w.Key("state").BeginObject().Field("warming_up", view->warming_up).Field("last_step", view->last_step);
      w.Field("last_time", stream::FormatIsoTime(view->last_time_ms)).Field("alert_active", view->alert_active);
      if (!view->warming_up) {
        w.Field("level", view->state.level).Field("trend", view->state.trend);
        w.Key("season").BeginArray();
        for (double v : model::SeasonChronological(view->state)) w.Number(v);
        w.EndArray();
      } else {
        w.Field("warmup_points", static_cast<int64_t>(view->warmup_points));
      }
      w.EndObject();
    }
    w.Key("flags").BeginArray();
    for (const store::FlagRecord& f : *recent) {
      w.BeginObject().Field("step", f.step).Field("time", stream::FormatIsoTime(f.time_ms)).Field("value", f.value);
      w.Field("expected", f.expected).Field("lower", f.lower).Field("upper", f.upper).Field("score", f.score);
      w.EndObject();
    }
    w.EndArray().Key("alerts").BeginArray();
    for (const store::AlertRecord& a : *alerts) {
      w.BeginObject().Field("step", a.step).Field("time", stream::FormatIsoTime(a.time_ms));
      w.Field("kind", a.kind == store::AlertKind::kRaised ? "raised" : "cleared").EndObject();
    }
    w.EndArray().Key("events").BeginArray();
    for (const store::EventRecord& e : *events)
      w.BeginObject().Field("time", stream::FormatIsoTime(e.time_ms)).Field("kind", e.kind).Field("detail", e.detail).EndObject();
    w.EndArray().EndObject();
    std::cout << w.str() << "\n";
    return 0;
  }
  std::printf("series   %s (profile %s)\n", series->series.name.c_str(), series->series.profile.c_str());
  if (m) {
    std::printf("model    %s  m=%d  alpha=%s beta=%s gamma=%s phi=%s  sigma2=%s\n", m->spec.c_str(), m->period,
                Num(m->alpha).c_str(), Num(m->beta).c_str(), Num(m->gamma).c_str(), Num(m->phi).c_str(),
                Num(m->sigma2).c_str());
    std::printf("         loglik=%s AICc=%s, fitted %s (%s)\n", Num(m->loglik).c_str(), Num(m->aicc).c_str(),
                stream::FormatIsoTime(m->fitted_ms).c_str(), m->reason.c_str());
  } else {
    std::printf("model    none yet (warming up)\n");
  }
  if (view) {
    std::printf("state    step %lld at %s%s\n", static_cast<long long>(view->last_step),
                stream::FormatIsoTime(view->last_time_ms).c_str(), view->alert_active ? ", ALERT ACTIVE" : "");
    if (!view->warming_up) {
      std::printf("         level=%s trend=%s", Num(view->state.level).c_str(), Num(view->state.trend).c_str());
      if (!view->state.season.empty()) std::printf(" season[%zu] next=%s", view->state.season.size(),
                                                    Num(view->state.SeasonAhead(1)).c_str());
      std::printf("\n");
    } else {
      std::printf("         %u warm-up points buffered\n", view->warmup_points);
    }
  }
  std::printf("\nrecent flags (newest first)\n%-8s %-24s %12s %12s %12s %12s %8s\n", "step", "time", "value",
              "expected", "low", "high", "score");
  for (const store::FlagRecord& f : *recent)
    std::printf("%-8lld %-24s %12s %12s %12s %12s %8.2f\n", static_cast<long long>(f.step),
                stream::FormatIsoTime(f.time_ms).c_str(), Num(f.value).c_str(), Num(f.expected).c_str(),
                Num(f.lower).c_str(), Num(f.upper).c_str(), f.score);
  std::printf("\nalerts (newest first)\n");
  for (const store::AlertRecord& a : *alerts)
    std::printf("  %-8s step %lld at %s\n", a.kind == store::AlertKind::kRaised ? "raised" : "cleared",
                static_cast<long long>(a.step), stream::FormatIsoTime(a.time_ms).c_str());
  std::printf("\nevents (newest first)\n");
  for (const store::EventRecord& e : *events)
    std::printf("  %s %-13s %s\n", stream::FormatIsoTime(e.time_ms).c_str(), e.kind.c_str(), e.detail.c_str());
  return 0;
}

int RunInspect(const InspectFlags& flags) {
  std::string path = flags.store;
  if (path.empty()) {
    Result<stream::Config> config = LoadConfig(flags.config);
    if (!config.ok()) {
      std::cerr << "plimsoll inspect: " << config.status().message() << "\n";
      return 2;
    }
    path = config->store.path;
  }
  store::StoreOptions options;
  options.path = path;
  options.read_only = true;
  Result<std::unique_ptr<store::Store>> store = store::Store::Open(options);
  if (!store.ok()) {
    std::cerr << "plimsoll inspect: store '" << path << "': " << store.status().ToString() << "\n";
    return 1;
  }
  if (flags.rejects) return ShowRejects(**store, flags);
  if (flags.series.empty()) return ListSeries(**store, flags);
  return ShowSeries(**store, flags);
}

void AddInspectVerb(CLI::App& app, CommandContext& context) {
  auto flags = std::make_shared<InspectFlags>();
  CLI::App* cmd = app.add_subcommand("inspect", "Read the store: series, one series' model and state, flags, alerts");
  cmd->add_option("series", flags->series, "show this series in detail (default: list all)");
  cmd->add_option("-c,--config", flags->config, "TOML configuration naming the store");
  cmd->add_option("--store", flags->store, "SQLite file (overrides the configuration)");
  cmd->add_flag("--rejects", flags->rejects, "list dead letters (rejected records with reasons)");
  cmd->add_option("--limit", flags->limit, "rows per list")->check(CLI::Range(1, 1'000'000));
  cmd->add_flag("--json", flags->json, "print JSON");
  cmd->callback([flags, &context] { context.exit_code = RunInspect(*flags); });
}

PLIMSOLL_REGISTER_VERB(AddInspectVerb);

}  // namespace
}  // namespace plimsoll::cli
