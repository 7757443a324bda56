#include <spdlog/spdlog.h>

#include <algorithm>
#if defined(__SANITIZE_THREAD__)
// Asio's handler recycling issues std::atomic_thread_fence, which GCC flags under TSan (-Wtsan).
// The pool's hand-over itself goes through a mutex and a condition variable, which TSan models.
#pragma GCC diagnostic ignored "-Wtsan"
#endif
#include <boost/asio/post.hpp>
#include <boost/asio/thread_pool.hpp>
#include <chrono>
#include <cmath>
#include <mutex>
#include <optional>
#include <stdexcept>
#include <thread>
#include <unordered_map>

#include "plimsoll/base/json_writer.h"
#include "plimsoll/base/thread_name.h"
#include "plimsoll/refit/refit.h"

namespace plimsoll::refit {
namespace {

using stream::Engine;
using stream::EngineBatch;
using stream::ModelChoice;

constexpr uint32_t kNoProfile = UINT32_MAX;
constexpr int kDurableWaitMs = 10;  // a worker waits this long for the writer to store its snapshot

class StoreReader final : public HistoryReader {
 public:
  explicit StoreReader(std::unique_ptr<store::Store> store) : store_(std::move(store)) {}
  Result<store::HistorySlice> Tail(std::string_view series, size_t n) override { return store_->HistoryTail(series, n); }

 private:
  std::unique_ptr<store::Store> store_;
};

// One fit handed to a worker. The owner fills the inputs; the worker fills the outputs; the
// done list's mutex orders the two.
struct Job {
  // inputs
  SeriesId series = 0;
  std::string name;
  stream::SeriesRules rules;
  bool additive_only = false;
  Trigger trigger = Trigger::kCount;
  int64_t snapshot_step = 0;       // the fitted history ends here
  int64_t read_step = 0;           // the series' last step at dispatch (>= snapshot_step)
  bool warmup = false;
  uint32_t epoch = 0;              // warm-up round
  std::string old_form;            // empty: none
  double old_aicc = NAN;
  // inputs (warm-up) / outputs (refits): the history fitted, oldest first
  std::vector<double> history;
  // outputs
  std::vector<double> tail;        // steps snapshot_step + 1 ... read_step, replayed at install
  std::optional<Result<ModelChoice>> choice;
  int64_t micros = 0;
};

// Why a finished refit is not installed.
enum class Stale : uint8_t { kNone, kMovedOn, kReseeded, kRefitted };
const char* StaleText(Stale s) {
  switch (s) {
    case Stale::kNone: return "";
    case Stale::kMovedOn: return "moved on by more than the lag bound";
    case Stale::kReseeded: return "re-seeded";
    case Stale::kRefitted: return "got another model";
  }
  return "";
}

// A job between dispatch and install, seen from the owner: the steps the series took since the
// snapshot, and whether the result is still wanted.
struct InFlight {
  std::shared_ptr<Job> job;
  std::vector<double> since;  // steps read_step + 1 ... in order (NaN gaps)
  Stale stale = Stale::kNone;  // why the result will be discarded
};

void WriteParams(JsonWriter& w, const model::ModelSpec& f, const model::Params& p) {
  w.Key("params").BeginObject().Field("alpha", p.alpha);
  if (f.has_trend()) w.Field("beta", p.beta);
  if (f.has_season()) w.Field("gamma", p.gamma);
  if (f.damped()) w.Field("phi", p.phi);
  w.EndObject();
}


class Service final : public stream::RefitService {
 public:
  Service(RefitServiceOptions options, stream::ModelChooser chooser, HistoryReaderFactory readers, Clock* clock)
      : options_(std::move(options)),
        chooser_(std::move(chooser)),
        readers_(std::move(readers)),
        clock_(clock),
        triggers_(options_.profiles),
        queue_(options_.queue_capacity),
        pool_(static_cast<size_t>(options_.threads)) {}

  ~Service() override { pool_.join(); }

  void Start(Engine& engine, const std::vector<stream::RestoredSeries>& restored) override {
    for (const stream::RestoredSeries& r : restored) {
      const uint32_t profile = ProfileOf(engine, r.id);
      const stream::SeriesView view = engine.View(r.id);
      if (!view.form) continue;
      triggers_.ModelInstalled(r.id, profile, r.model_fitted_ms > 0 ? r.model_fitted_ms : clock_->WallMillis());
      Aicc(r.id) = r.model_aicc;
      if (r.stored_profile != view.profile) {
        spdlog::info("series '{}': profile changed from '{}' to '{}', refit queued", view.name, r.stored_profile,
                     view.profile);
        queue_.Push({r.id, Trigger::kProfileChange, triggers_.ModelTime(r.id)});
      }
    }
    if (!options_.requests_path.empty()) {
      store::StoreOptions so;
      so.path = options_.requests_path;
      Result<std::unique_ptr<store::Store>> table = store::Store::Open(so);
      if (table.ok()) requests_ = std::move(table).value();
      else spdlog::warn("refit requests cannot be read, explicit refits are off: {}", table.status().ToString());
    }
  }

  size_t OnBatch(Engine& engine, const EngineBatch& taken, int64_t now_ms,
                 std::vector<store::EventRecord>& events) override {
    now_ms_ = now_ms;
    for (const stream::EngineEvent& e : taken.events)
      if (e.kind == stream::EventKind::kReseeded) MarkStale(e.series, Stale::kReseeded);
    for (const stream::ModelChange& m : taken.models) {
      // Our own installs say "refit: ..."; any other model change makes a running refit moot.
      if (m.reason.rfind("refit", 0) != 0) MarkStale(m.series, Stale::kRefitted);
      triggers_.ModelInstalled(m.series, ProfileOf(engine, m.series), now_ms);
      Aicc(m.series) = m.choice.aicc;
    }
    Capture(engine, taken);
    for (const stream::AlertRecord& a : taken.alerts)
      if (a.kind == stream::AlertKind::kRaised && triggers_.OnAlert(ProfileOf(engine, a.series)))
        Queue({a.series, Trigger::kAlert, triggers_.ModelTime(a.series), a.step});
    for (SeriesId id : engine.TakeRefitRequests()) Queue({id, Trigger::kNonPositive, triggers_.ModelTime(id)});
    for (stream::WarmupRequest& w : engine.TakeWarmupRequests()) {
      const SeriesId id = w.series;
      warmups_[id] = std::move(w);
      if (!Queue({id, Trigger::kWarmup, INT64_MIN})) warmups_.erase(id);  // the engine fits it inline later
    }
    if (now_ms - last_age_scan_ms_ >= options_.age_scan_ms) {
      last_age_scan_ms_ = now_ms;
      for (SeriesId id : triggers_.Aged(now_ms)) Queue({id, Trigger::kAge, triggers_.ModelTime(id)});
    }
    if (requests_ && !stopping_ && now_ms - last_request_poll_ms_ >= options_.request_poll_ms) {
      // (Not while stopping: a request taken then could not be queued and would be lost.)
      last_request_poll_ms_ = now_ms;
      ReadRequests(engine);
    }
    const size_t installed = InstallFinished(engine, events);
    Dispatch(engine);
    return installed;
  }

  void Stop(Engine& engine) override {
    if (stopping_) return;
    for (stream::WarmupRequest& w : engine.TakeWarmupRequests()) {
      const SeriesId id = w.series;
      warmups_[id] = std::move(w);
    }
    std::vector<SeriesId> waiting;
    for (const auto& [id, request] : warmups_) waiting.push_back(id);
    for (SeriesId id : waiting) StartJob(engine, RefitTask{id, Trigger::kWarmup, INT64_MIN});
    stopping_ = true;
    const size_t dropped = queue_.Clear();
    warmups_.clear();
    pool_.join();
    if (dropped > 0) spdlog::info("refit: {} queued refit(s) dropped at shutdown", dropped);
  }

  std::string Summary() const override {
    const RefitCounters c = Counters();
    return "refits installed " + std::to_string(c.installed) + ", warm-up fits " + std::to_string(c.warmups) +
           ", failed " + std::to_string(c.failed) + ", over budget " + std::to_string(c.timed_out) + ", discarded " +
           std::to_string(c.discarded_lag + c.discarded_reseeded + c.discarded_refitted) + ", dropped from queue " +
           std::to_string(c.queue.dropped);
  }

  RefitCounters Counters() const {
    RefitCounters c = counters_;
    c.queue = queue_.counters();
    return c;
  }

 private:
  uint32_t ProfileOf(const Engine& engine, SeriesId id) {
    if (id >= profile_of_.size()) profile_of_.resize(static_cast<size_t>(id) + 1, kNoProfile);
    uint32_t& p = profile_of_[id];
    if (p == kNoProfile) {
      const std::string profile = engine.View(id).profile;
      const auto& profiles = engine.options().profiles;
      for (uint32_t i = 0; i < profiles.size(); ++i)
        if (profiles[i].match == profile) {
          p = i;
          break;
        }
    }
    return p;
  }

  double& Aicc(SeriesId id) {
    if (id >= aicc_.size()) aicc_.resize(static_cast<size_t>(id) + 1, NAN);
    return aicc_[id];
  }

  InFlight* Running(SeriesId id) {
    if (id >= slot_of_.size() || slot_of_[id] < 0) return nullptr;
    return &running_[static_cast<size_t>(slot_of_[id])];
  }

  void MarkStale(SeriesId id, Stale why) {
    InFlight* f = Running(id);
    if (f == nullptr || f->stale != Stale::kNone || f->job->warmup) return;
    f->stale = why;
    f->since = std::vector<double>();
  }

  bool Queue(const RefitTask& task) {
    if (stopping_) return false;
    return queue_.Push(task);
  }

  // Keeps the steps that arrive for series with a refit running (they are replayed at install)
  // and counts observations for the count trigger.
  void Capture(const Engine& engine, const EngineBatch& taken) {
    // Steps up to a model chosen in this batch were fitted by it: they do not count towards the next.
    std::unordered_map<SeriesId, int64_t> model_step;
    for (const stream::ModelChange& m : taken.models) model_step[m.series] = m.step;
    for (const stream::HistoryPoint& h : taken.history) {
      bool value = !std::isnan(h.value);
      if (value && !model_step.empty()) {
        auto it = model_step.find(h.series);
        value = it == model_step.end() || h.step > it->second;
      }
      if (value && triggers_.Observed(h.series, ProfileOf(engine, h.series), 1))
        Queue({h.series, Trigger::kCount, triggers_.ModelTime(h.series), h.step});
      if (running_.empty()) continue;
      InFlight* f = Running(h.series);
      if (f == nullptr || f->stale != Stale::kNone || f->job->warmup || h.step <= f->job->read_step) continue;
      f->since.push_back(h.value);
      if (h.step - f->job->snapshot_step > options_.max_lag_steps) {
        f->stale = Stale::kMovedOn;
        f->since = std::vector<double>();
      }
    }
  }

  void ReadRequests(const Engine& engine) {
    Result<std::vector<store::RefitRequestRecord>> rows = requests_->TakeRefitRequests();
    if (!rows.ok()) {
      spdlog::warn("refit requests not read: {}", rows.status().ToString());
      return;
    }
    for (const store::RefitRequestRecord& row : *rows) {
      ++counters_.requests;
      size_t matched = 0;
      for (SeriesId id = 0; id < engine.series_count(); ++id) {
        if (!stream::GlobMatch(row.pattern, engine.SeriesName(id))) continue;
        ++matched;
        Queue({id, Trigger::kRequest, triggers_.ModelTime(id)});
      }
      spdlog::info("refit request {} for '{}': {} series queued", row.id, row.pattern, matched);
    }
  }

  void Dispatch(Engine& engine) {
    std::vector<RefitTask> deferred;  // series with a fit running: keep them queued
    while (!stopping_ && running_.size() < static_cast<size_t>(options_.threads)) {
      std::optional<RefitTask> task = queue_.Pop();
      if (!task) break;
      if (Running(task->series) != nullptr) deferred.push_back(*task);
      else StartJob(engine, *task);
    }
    for (const RefitTask& t : deferred) queue_.Push(t);
  }

  // Hands `task` to the pool unless it no longer applies. REQUIRES: no job running for the series.
  void StartJob(Engine& engine, const RefitTask& task) {
    auto job = std::make_shared<Job>();
    const stream::SeriesView view = engine.View(task.series);
    job->series = task.series;
    job->name = view.name;
    const uint32_t profile = ProfileOf(engine, task.series);
    if (profile == kNoProfile) return;
    job->rules = engine.options().profiles[profile];
    job->additive_only = view.additive_only;
    job->trigger = task.trigger;
    job->read_step = view.last_step;
    // A trigger step the engine has since re-seeded past (or never reached) falls back to now.
    job->snapshot_step = task.snapshot_step != kSnapshotAtDispatch && task.snapshot_step <= view.last_step
                             ? task.snapshot_step
                             : view.last_step;
    if (task.trigger == Trigger::kWarmup) {
      auto it = warmups_.find(task.series);
      if (it == warmups_.end()) return;
      job->warmup = true;
      job->epoch = it->second.epoch;
      job->additive_only = it->second.additive_only;
      job->history = std::move(it->second.values);
      warmups_.erase(it);
    } else if (view.warming_up) {
      return;  // re-seeded since it was queued: its warm-up fit comes by itself
    } else {
      job->old_form = view.form->Notation();
      job->old_aicc = Aicc(task.series);
    }
    if (task.series >= slot_of_.size()) slot_of_.resize(static_cast<size_t>(task.series) + 1, -1);
    slot_of_[task.series] = static_cast<int32_t>(running_.size());
    running_.push_back(InFlight{job, {}, Stale::kNone});
    ++counters_.started;
    boost::asio::post(pool_, [this, job] { Run(*job); });
  }

  // Worker thread: reads the snapshot (refits) and fits it.
  void Run(Job& job) {
    NameThisThread("plimsoll-refit");  // the pool's threads are Asio's: one syscall per fit
    const int64_t start = clock_->MonotonicNanos();
    Status read = job.warmup ? Status::Ok() : ReadSnapshot(job);
    if (read.ok()) job.choice = chooser_(job.history, job.rules, job.additive_only);
    else job.choice = read;
    job.micros = (clock_->MonotonicNanos() - start) / 1000;
    std::lock_guard<std::mutex> lock(done_mu_);
    done_.push_back(job.series);
  }

  // Worker thread: the last `history` steps through the snapshot step and the steps after it
  // through read_step, once the writer has made them durable (it commits every commit_ms; the
  // wait is bounded by the time budget).
  Status ReadSnapshot(Job& job) {
    std::unique_ptr<HistoryReader> reader = CheckOutReader();
    if (!reader) return Status::Unavailable("no history reader");
    const size_t n = static_cast<size_t>(std::max(job.rules.history, 2)) +
                     static_cast<size_t>(job.read_step - job.snapshot_step);
    const int64_t attempts = std::max<int64_t>(1, options_.time_budget_ms / kDurableWaitMs);
    Status status;
    size_t extra = 64;
    for (int64_t attempt = 0; attempt < attempts; ++attempt) {
      Result<store::HistorySlice> slice = reader->Tail(job.name, n + extra);
      if (!slice.ok()) {
        status = slice.status();
        break;
      }
      const int64_t end = slice->first_step + static_cast<int64_t>(slice->values.size()) - 1;
      if (end < job.read_step) {
        status = Status::Unavailable("history of '" + job.name + "' not yet durable through step " +
                                     std::to_string(job.read_step));
        std::this_thread::sleep_for(std::chrono::milliseconds(kDurableWaitMs));
        continue;
      }
      const size_t beyond = static_cast<size_t>(end - job.read_step);
      if (beyond > extra && slice->values.size() == n + extra) {
        extra = beyond + 64;  // more was stored after the snapshot than asked for: read again
        --attempt;
        continue;
      }
      const auto& v = slice->values;
      const size_t read_end = v.size() - std::min(beyond, v.size());
      const size_t tail = std::min(static_cast<size_t>(job.read_step - job.snapshot_step), read_end);
      const size_t fit_end = read_end - tail;
      const size_t fit_points = static_cast<size_t>(std::max(job.rules.history, 2));
      const size_t from = fit_end > fit_points ? fit_end - fit_points : 0;
      job.history.assign(v.begin() + static_cast<std::ptrdiff_t>(from), v.begin() + static_cast<std::ptrdiff_t>(fit_end));
      job.tail.assign(v.begin() + static_cast<std::ptrdiff_t>(fit_end), v.begin() + static_cast<std::ptrdiff_t>(read_end));
      status = Status::Ok();
      break;
    }
    CheckInReader(std::move(reader));
    return status;
  }

  std::unique_ptr<HistoryReader> CheckOutReader() {
    {
      std::lock_guard<std::mutex> lock(readers_mu_);
      if (!free_readers_.empty()) {
        std::unique_ptr<HistoryReader> r = std::move(free_readers_.back());
        free_readers_.pop_back();
        return r;
      }
    }
    Result<std::unique_ptr<HistoryReader>> made = readers_();
    if (!made.ok()) {
      spdlog::warn("refit: cannot open a history reader: {}", made.status().ToString());
      return nullptr;
    }
    return std::move(made).value();
  }

  void CheckInReader(std::unique_ptr<HistoryReader> reader) {
    std::lock_guard<std::mutex> lock(readers_mu_);
    free_readers_.push_back(std::move(reader));
  }

  // Returns how many finished jobs changed a series in the engine (models and warm-up fits).
  size_t InstallFinished(Engine& engine, std::vector<store::EventRecord>& events) {
    size_t installed = 0;
    std::vector<SeriesId> done;
    {
      std::lock_guard<std::mutex> lock(done_mu_);
      done.swap(done_);
    }
    for (SeriesId id : done) {
      // Take the job out of the running set (swap-remove keeps the slots dense).
      const size_t slot = static_cast<size_t>(slot_of_[id]);
      InFlight f = std::move(running_[slot]);
      if (slot + 1 != running_.size()) {
        running_[slot] = std::move(running_.back());
        slot_of_[running_[slot].job->series] = static_cast<int32_t>(slot);
      }
      running_.pop_back();
      slot_of_[id] = -1;
      if (Finish(engine, f, events)) ++installed;
    }
    return installed;
  }

  void Event(std::vector<store::EventRecord>& events, const Job& job, std::string kind, JsonWriter& w) {
    w.Field("trigger", TriggerName(job.trigger)).Field("duration_ms", job.micros / 1000).EndObject();
    events.push_back(store::EventRecord{now_ms_, job.name, std::move(kind), w.Take()});
  }

  // Returns whether it changed the series in the engine.
  bool Finish(Engine& engine, InFlight& f, std::vector<store::EventRecord>& events) {
    Job& job = *f.job;
    const Result<ModelChoice>& choice = *job.choice;
    if (job.warmup) {
      if (engine.CompleteWarmup(job.series, job.epoch, choice).ok()) {
        ++counters_.warmups;
        return true;
      }
      ++counters_.discarded_reseeded;
      return false;
    }
    const stream::SeriesView view = engine.View(job.series);
    const int64_t caught_up = view.last_step - job.snapshot_step;
    Stale stale = f.stale;
    if (stale == Stale::kNone && view.last_step - job.snapshot_step > options_.max_lag_steps) stale = Stale::kMovedOn;
    if (stale == Stale::kNone &&
        (view.warming_up || caught_up != static_cast<int64_t>(job.tail.size() + f.since.size())))
      stale = Stale::kReseeded;
    if (stale != Stale::kNone) {
      if (stale == Stale::kMovedOn) ++counters_.discarded_lag;
      else if (stale == Stale::kRefitted) ++counters_.discarded_refitted;
      else ++counters_.discarded_reseeded;
      spdlog::info("series '{}': refit ({}) discarded: series {} meanwhile", job.name, TriggerName(job.trigger),
                   StaleText(stale));
      JsonWriter w;
      w.BeginObject().Field("reason", std::string("series ") + StaleText(stale) + " meanwhile");
      Event(events, job, "refit_discarded", w);
      return false;
    }
    Status status = choice.ok() ? Status::Ok() : choice.status();
    if (status.ok() && job.micros > options_.time_budget_ms * 1000) {
      ++counters_.timed_out;
      status = Status::Aborted("over the time budget (" + std::to_string(job.micros / 1000) + " ms > " +
                               std::to_string(options_.time_budget_ms) + " ms)");
    } else if (!status.ok()) {
      ++counters_.failed;
    }
    std::vector<double> history;
    if (status.ok()) {
      history.reserve(job.history.size() + job.tail.size() + f.since.size());
      history.insert(history.end(), job.history.begin(), job.history.end());
      history.insert(history.end(), job.tail.begin(), job.tail.end());
      history.insert(history.end(), f.since.begin(), f.since.end());
      status = engine.InstallModel(job.series, *choice, history, std::string("refit: ") + std::string(TriggerName(job.trigger)),
                                   job.history.size());
      if (!status.ok()) ++counters_.failed;
    }
    if (!status.ok()) {
      triggers_.Rearm(job.series);
      spdlog::warn("series '{}': refit ({}) failed, {} kept: {}", job.name, TriggerName(job.trigger), job.old_form,
                   status.ToString());
      JsonWriter w;
      w.BeginObject().Field("reason", status.ToString()).Field("form", job.old_form);
      Event(events, job, "refit_failed", w);
      return false;
    }
    ++counters_.installed;
    if (job.trigger == Trigger::kProfileChange && requests_) {
      // The store now remembers the profile the model was chosen under, so the next start does
      // not refit again. (A crash before the model change is durable loses that refit.)
      Status recorded = requests_->SetSeriesProfile(job.name, job.rules.match);
      if (!recorded.ok()) spdlog::warn("series '{}': new profile not recorded: {}", job.name, recorded.ToString());
    }
    const ModelChoice& c = *choice;
    triggers_.ModelInstalled(job.series, ProfileOf(engine, job.series), now_ms_);
    Aicc(job.series) = c.aicc;
    const std::string form = c.spec.Notation();
    spdlog::info("series '{}': refit ({}) {} -> {}, AICc {:.2f} -> {:.2f}, {} points fitted, {} caught up, {} ms",
                 job.name, TriggerName(job.trigger), job.old_form, form, job.old_aicc, c.aicc, job.history.size(),
                 caught_up, job.micros / 1000);
    JsonWriter w;
    w.BeginObject().Field("old_form", job.old_form).Field("new_form", form);
    w.Field("old_aicc", job.old_aicc).Field("new_aicc", c.aicc);
    WriteParams(w, c.spec, c.params);
    w.Field("sigma2", c.initial.sigma2).Field("points", static_cast<int64_t>(job.history.size()));
    w.Field("snapshot_step", job.snapshot_step).Field("caught_up", caught_up);
    w.Field("reason", std::string("refit: ") + std::string(TriggerName(job.trigger)));
    Event(events, job, "model_changed", w);
    return true;
  }

  const RefitServiceOptions options_;
  const stream::ModelChooser chooser_;
  const HistoryReaderFactory readers_;
  Clock* const clock_;

  // Owner thread only.
  RefitTriggers triggers_;
  RefitQueue queue_;
  RefitCounters counters_;
  std::vector<uint32_t> profile_of_;  // engine profile index per series, kNoProfile until looked up
  std::vector<double> aicc_;          // AICc of the model in force, per series
  std::vector<int32_t> slot_of_;      // index into running_, -1 when no fit is running
  std::vector<InFlight> running_;
  std::unordered_map<SeriesId, stream::WarmupRequest> warmups_;  // queued warm-up fits
  std::unique_ptr<store::Store> requests_;  // own read-write connection for refit_requests
  int64_t now_ms_ = 0;
  int64_t last_age_scan_ms_ = INT64_MIN / 2;
  int64_t last_request_poll_ms_ = INT64_MIN / 2;
  bool stopping_ = false;

  // Shared with workers.
  std::mutex readers_mu_;
  std::vector<std::unique_ptr<HistoryReader>> free_readers_;  // guarded by readers_mu_
  std::mutex done_mu_;
  std::vector<SeriesId> done_;  // guarded by done_mu_: series whose job finished

  boost::asio::thread_pool pool_;  // last: joined before the members its jobs use are destroyed
};

}  // namespace

HistoryReaderFactory StoreHistoryReaders(store::StoreOptions options) {
  options.read_only = true;
  return [options]() -> Result<std::unique_ptr<HistoryReader>> {
    Result<std::unique_ptr<store::Store>> store = store::Store::Open(options);
    if (!store.ok()) return store.status();
    return std::unique_ptr<HistoryReader>(std::make_unique<StoreReader>(std::move(store).value()));
  };
}

int DefaultThreads() {
  const unsigned cores = std::thread::hardware_concurrency();
  return cores > 1 ? static_cast<int>(cores) - 1 : 1;
}

RefitServiceOptions RefitServiceOptionsFromConfig(const stream::Config& config) {
  RefitServiceOptions out;
  out.threads = config.refit.threads > 0 ? config.refit.threads : DefaultThreads();
  out.queue_capacity = static_cast<size_t>(config.refit.queue);
  out.time_budget_ms = config.refit.time_budget_ms;
  out.max_lag_steps = config.refit.max_lag;
  for (const stream::ProfileOptions& p : config.profiles)
    out.profiles.push_back(TriggerRules{p.refit_every, p.refit_max_age_ms, p.refit_on_alert});
  out.requests_path = config.store.path;
  return out;
}

std::unique_ptr<stream::RefitService> MakeRefitService(RefitServiceOptions options, stream::ModelChooser chooser,
                                                       HistoryReaderFactory readers, Clock* clock) {
  if (options.threads < 1) throw std::invalid_argument("refit: threads must be >= 1");
  if (options.queue_capacity < 1) throw std::invalid_argument("refit: queue must be >= 1");
  if (options.time_budget_ms <= 0) throw std::invalid_argument("refit: time budget must be positive");
  if (options.max_lag_steps < 1) throw std::invalid_argument("refit: max lag must be >= 1");
  if (!chooser || !readers || clock == nullptr) throw std::invalid_argument("refit: chooser, readers and clock needed");
  return std::make_unique<Service>(std::move(options), std::move(chooser), std::move(readers), clock);
}

Result<size_t> RequestRefit(store::Store& store, std::string_view pattern, std::string_view reason,
                            int64_t now_ms) {
  if (Status glob = stream::ValidateGlob(pattern); !glob.ok())
    return glob.WithContext("pattern '" + std::string(pattern) + "'");
  size_t matched = 0;
  std::string after;
  for (;;) {
    Result<std::vector<store::StoredSeries>> page = store.ListSeries(1000, after);
    if (!page.ok()) return page.status();
    for (const store::StoredSeries& s : *page) matched += stream::GlobMatch(pattern, s.series.name) ? 1 : 0;
    if (page->size() < 1000) break;
    after = page->back().series.name;
  }
  if (matched == 0) return Status::NotFound("no stored series matches '" + std::string(pattern) + "'");
  PLIMSOLL_RETURN_IF_ERROR(store.AddRefitRequest(pattern, reason, now_ms));
  return matched;
}

RefitCounters CountersOf(const stream::RefitService& service) {
  return static_cast<const Service&>(service).Counters();
}

}  // namespace plimsoll::refit
