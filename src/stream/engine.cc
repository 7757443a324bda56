#include "plimsoll/stream/engine.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <optional>
#include <stdexcept>
#include <string>
#include <utility>

#include "plimsoll/base/bytes.h"
#include "plimsoll/base/json_writer.h"
#include "plimsoll/model/forecast.h"
#include "plimsoll/model/update.h"
#include "plimsoll/stream/config.h"
#include "stream/alert_tracker.h"
#include "stream/step_aligner.h"

namespace plimsoll::stream {
namespace {

constexpr uint8_t kCheckpointVersion = 1;
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// Series name -> id, open addressing with linear probing. A slot is (hash high 32 bits << 32) |
// (id + 1), 0 when empty; names are compared against the series table, so the index keeps no
// copy of them. 8 bytes per slot at load <= 1/2, against ~70 bytes per node of a node map, and
// one probe usually touches one slot plus the matching series' name.
class SeriesIndex {
 public:
  static uint64_t Hash(std::string_view name) { return std::hash<std::string_view>{}(name); }

  // `name_of(id)` returns the stored name of series `id`.
  template <typename NameOf>
  std::optional<SeriesId> Find(std::string_view name, uint64_t hash, const NameOf& name_of) const {
    if (slots_.empty()) return std::nullopt;
    const uint64_t tag = hash >> 32;
    for (size_t i = hash & mask_;; i = (i + 1) & mask_) {
      const uint64_t slot = slots_[i];
      if (slot == 0) return std::nullopt;
      if ((slot >> 32) == tag) {
        const SeriesId id = static_cast<SeriesId>(slot & 0xffffffffu) - 1;
        if (name_of(id) == name) return id;
      }
    }
  }

  // REQUIRES: `id` not yet present; ids below it were inserted before.
  template <typename NameOf>
  void Insert(SeriesId id, uint64_t hash, const NameOf& name_of) {
    if (2 * (size_ + 1) > slots_.size()) Grow(name_of);
    Place(id, hash);
    ++size_;
  }

  // Starts loading the slot a lookup of `hash` reads first.
  void Prefetch(uint64_t hash) const {
    if (!slots_.empty()) __builtin_prefetch(&slots_[hash & mask_]);
  }
  // The first id whose tag matches `hash`, without comparing names: a guess for prefetching the
  // series' data (Find confirms it).
  std::optional<SeriesId> Candidate(uint64_t hash) const {
    if (slots_.empty()) return std::nullopt;
    const uint64_t tag = hash >> 32;
    for (size_t i = hash & mask_;; i = (i + 1) & mask_) {
      const uint64_t slot = slots_[i];
      if (slot == 0) return std::nullopt;
      if ((slot >> 32) == tag) return static_cast<SeriesId>(slot & 0xffffffffu) - 1;
    }
  }

  size_t size() const { return size_; }
  size_t ResidentBytes() const { return slots_.capacity() * sizeof(uint64_t); }

 private:
  void Place(SeriesId id, uint64_t hash) {
    size_t i = hash & mask_;
    while (slots_[i] != 0) i = (i + 1) & mask_;
    slots_[i] = ((hash >> 32) << 32) | (static_cast<uint64_t>(id) + 1);
  }
  template <typename NameOf>
  void Grow(const NameOf& name_of) {
    std::vector<uint64_t> old = std::exchange(slots_, std::vector<uint64_t>(std::max<size_t>(16, 2 * slots_.size())));
    mask_ = slots_.size() - 1;
    for (uint64_t slot : old) {
      if (slot == 0) continue;
      const SeriesId id = static_cast<SeriesId>(slot & 0xffffffffu) - 1;
      Place(id, Hash(name_of(id)));
    }
  }

  std::vector<uint64_t> slots_;
  size_t mask_ = 0;
  size_t size_ = 0;
};

static_assert(static_cast<uint8_t>(FlagPolicy::kUpdate) == static_cast<uint8_t>(model::BandPolicy::kUpdate) &&
                  static_cast<uint8_t>(FlagPolicy::kClip) == static_cast<uint8_t>(model::BandPolicy::kClip) &&
                  static_cast<uint8_t>(FlagPolicy::kSkip) == static_cast<uint8_t>(model::BandPolicy::kSkip),
              "flag policies map one to one onto the model's band policies");

// Profile rules plus what the engine derives from them once.
struct ResolvedRules {
  SeriesRules rules;
  AlertRule alert;
  double z;  // band half-width in standard deviations
  model::BandPolicy policy;
};

struct SeriesRuntime {
  std::string name;
  uint32_t rules_index = 0;
  bool warming_up = true;
  bool additive_only = false;  // a non-positive value met a multiplicative form
  bool dirty = false;
  bool fit_pending = false;    // a WarmupRequest is out (background_warmup)
  uint32_t epoch = 0;          // warm-up round; bumped when a round ends (fit, failure, re-seed)
  StepAligner aligner;
  AlertTracker alerts;
  model::ModelSpec spec;
  model::Params params;
  // The live step (forecast, band, flag, update at once); gap steps and replays dispatch on `spec`
  // (rare), so the plain kernel is not kept per series.
  model::BandedUpdateFn banded = nullptr;
  double band_sd = 0.0;  // BandSd(state.sigma2): the band's standard deviation
  model::State state;
  int64_t last_time_ms = 0;
  int64_t next_fit_at = 0;             // warm-up observations needed before the next fit attempt
  std::vector<double> warmup_values;   // warm-up history, NaN for gaps; empty once fitted
};

// The band's standard deviation as the engine has always formed it: sigma = sqrt(sigma2), then
// OneStepBand's sqrt(sigma * sigma); kept bit for bit so stored bands do not move.
double BandSd(double sigma2) {
  const double sigma = std::sqrt(sigma2);
  return std::sqrt(sigma * sigma);
}

int64_t CountObserved(std::span<const double> values) {
  int64_t n = 0;
  for (double v : values) n += std::isnan(v) ? 0 : 1;
  return n;
}

// Length of the shortest prefix of `values` holding `target` observations (it ends on one), or
// 0 when there are not that many. The warm-up fit always sees this prefix, however late it runs.
size_t WarmupPrefix(std::span<const double> values, int64_t target) {
  int64_t n = 0;
  for (size_t i = 0; i < values.size(); ++i)
    if (!std::isnan(values[i]) && ++n >= target) return i + 1;
  return 0;
}

// What the state sees of observation `y` under the profile's flag policy, and whether it is flagged.
double PolicyInput(FlagPolicy policy, double y, const model::Band& band, bool& flagged) {
  flagged = y < band.lower || y > band.upper;
  if (!flagged || policy == FlagPolicy::kUpdate) return y;
  if (policy == FlagPolicy::kClip) return y < band.lower ? band.lower : band.upper;
  return std::numeric_limits<double>::quiet_NaN();
}

std::string ModelDetail(const ModelChoice& choice, size_t points) {
  JsonWriter w;
  w.BeginObject().Field("form", choice.spec.Notation()).Field("period", choice.spec.period);
  w.Key("params").BeginObject().Field("alpha", choice.params.alpha);
  if (choice.spec.has_trend()) w.Field("beta", choice.params.beta);
  if (choice.spec.has_season()) w.Field("gamma", choice.params.gamma);
  if (choice.spec.damped()) w.Field("phi", choice.params.phi);
  w.EndObject();
  w.Field("sigma2", choice.initial.sigma2).Field("loglik", choice.loglik).Field("aicc", choice.aicc);
  w.Field("points", static_cast<int64_t>(points));
  if (!choice.note.empty()) w.Field("note", choice.note);
  w.EndObject();
  return w.Take();
}

}  // namespace

struct Engine::Impl {
  Impl(const EngineOptions& options, ModelChooser choose, Clock* clk, EngineCounters& ctr)
      : opts(options), chooser(std::move(choose)), clock(clk), counters(ctr) {}

  const EngineOptions& opts;
  ModelChooser chooser;
  Clock* clock;
  EngineCounters& counters;
  std::vector<ResolvedRules> rules;
  std::vector<SeriesRuntime> series;
  SeriesIndex index;
  EngineBatch batch;
  std::vector<SeriesId> refit_requests;
  bool any_aggregated = false;    // some profile aggregates on a grid: AdvanceClock has work
  std::vector<uint64_t> hashes;   // ObserveBatch scratch
  std::vector<SeriesId> guesses;  // ObserveBatch scratch: Candidate() per record, kNoGuess if none
  static constexpr SeriesId kNoGuess = std::numeric_limits<SeriesId>::max();

  // Starts loading what applying a record to series `id` reads: the runtime record.
  void PrefetchSeries(SeriesId id) const {
    const char* p = reinterpret_cast<const char*>(&series[id]);
    for (size_t line = 0; line < sizeof(SeriesRuntime); line += 64) __builtin_prefetch(p + line);
  }
  // ... and the seasonal slot its next update writes (the runtime record must have arrived).
  void PrefetchSeason(SeriesId id) const {
    const model::State& st = series[id].state;
    if (!st.season.empty()) __builtin_prefetch(st.season.data() + st.head, 1);
  }
  std::vector<WarmupRequest> warmup_requests;

  // Context of the record being applied, for dead letters raised while applying it.
  std::string_view raw;
  int32_t stream_index = -1;
  int64_t offset = -1;
  int64_t record_time_ms = 0;

  void DeadLetter(std::string reason, StatusCode code) {
    ++counters.dead_letters;
    batch.dead_letters.push_back(plimsoll::stream::DeadLetter{
        std::string(raw.substr(0, opts.dead_letter_bytes)), std::move(reason), code, stream_index, offset});
  }

  void MarkDirty(SeriesId id) {
    SeriesRuntime& s = series[id];
    if (!s.dirty) {
      s.dirty = true;
      batch.dirty.push_back(id);
    }
  }

  const std::string& NameOf(SeriesId id) const { return series[id].name; }
  std::optional<SeriesId> Find(std::string_view name, uint64_t hash) const {
    return index.Find(name, hash, [this](SeriesId id) -> const std::string& { return NameOf(id); });
  }

  // `hash` is SeriesIndex::Hash(name).
  std::optional<SeriesId> Create(std::string_view name, uint64_t hash) {
    if (!opts.create_series) {
      DeadLetter("unknown series '" + std::string(name) + "' (series creation is disabled)", StatusCode::kNotFound);
      return std::nullopt;
    }
    if (series.size() >= opts.max_series) {
      DeadLetter("series '" + std::string(name) + "' refused: limit of " + std::to_string(opts.max_series) +
                     " series reached",
                 StatusCode::kOutOfRange);
      return std::nullopt;
    }
    for (uint32_t i = 0; i < rules.size(); ++i) {
      if (!GlobMatch(rules[i].rules.match, name)) continue;
      SeriesId id = static_cast<SeriesId>(series.size());
      // Grow by 1/8 rather than doubling: the table is most of the engine's memory, and creating
      // a series is rare enough that the extra moves do not matter.
      if (series.size() == series.capacity()) series.reserve(series.size() + std::max<size_t>(1024, series.size() / 8));
      SeriesRuntime& s = series.emplace_back();
      s.name = std::string(name);
      s.rules_index = i;
      s.next_fit_at = rules[i].rules.warmup;
      index.Insert(id, hash, [this](SeriesId k) -> const std::string& { return NameOf(k); });
      batch.events.push_back({id, 0, EventKind::kCreated, "{\"profile\":\"" + rules[i].rules.match + "\"}"});
      MarkDirty(id);
      return id;
    }
    DeadLetter("no profile matches series '" + std::string(name) + "'", StatusCode::kNotFound);
    return std::nullopt;
  }

  int64_t StepTime(const SeriesRules& r, int64_t step) const {
    return r.interval_ms > 0 ? step * r.interval_ms : record_time_ms;
  }

  void Install(SeriesId id, const ModelChoice& choice) {
    SeriesRuntime& s = series[id];
    s.spec = choice.spec;
    s.params = choice.params;
    s.banded = model::SelectBandedUpdate(choice.spec);
    s.state = choice.initial;
    s.band_sd = BandSd(choice.initial.sigma2);
    s.warming_up = false;
  }

  void TryFit(SeriesId id, int64_t step) {
    SeriesRuntime& s = series[id];
    const size_t prefix = WarmupPrefix(s.warmup_values, s.next_fit_at);
    ++counters.fits;
    FinishWarmup(id, step, prefix,
                 chooser(std::span<const double>(s.warmup_values).first(prefix), rules[s.rules_index].rules,
                         s.additive_only));
  }

  // Queues the warm-up fit off the owner thread (background_warmup) when enough is buffered.
  void MaybeRequestWarmup(SeriesId id) {
    SeriesRuntime& s = series[id];
    if (s.fit_pending || !s.warming_up) return;
    const size_t prefix = WarmupPrefix(s.warmup_values, s.next_fit_at);
    if (prefix == 0) return;
    s.fit_pending = true;
    warmup_requests.push_back(WarmupRequest{
        id, s.epoch, std::vector<double>(s.warmup_values.begin(), s.warmup_values.begin() + prefix), s.additive_only});
  }

  // Ends a warm-up round whose fit saw the first `prefix` buffered steps; `last_step` is the step
  // of the newest buffered value. Steps buffered after the prefix go through the live path.
  void FinishWarmup(SeriesId id, int64_t last_step, size_t prefix, const Result<ModelChoice>& choice) {
    SeriesRuntime& s = series[id];
    const SeriesRules& r = rules[s.rules_index].rules;
    s.fit_pending = false;
    ++s.epoch;
    MarkDirty(id);
    if (!choice.ok()) {
      ++counters.fit_failures;
      JsonWriter w;
      w.BeginObject().Field("reason", choice.status().ToString()).EndObject();
      batch.events.push_back({id, last_step, EventKind::kFitFailed, w.Take()});
      s.next_fit_at = CountObserved(std::span<const double>(s.warmup_values).first(prefix)) + std::max(1, r.warmup / 2);
      // Keep at most `history` points of the fitted prefix while waiting for a fit that works.
      if (prefix > static_cast<size_t>(r.history))
        s.warmup_values.erase(s.warmup_values.begin(),
                              s.warmup_values.begin() + static_cast<std::ptrdiff_t>(prefix - r.history));
      if (opts.background_warmup) MaybeRequestWarmup(id);
      return;
    }
    Install(id, *choice);
    std::vector<double> buffered = std::exchange(s.warmup_values, std::vector<double>());
    // Replay the fitted history through the same kernel the live path uses.
    const model::UpdateFn update = model::SelectUpdate(s.spec);
    for (size_t i = 0; i < prefix; ++i) update(s.params, s.state, buffered[i]);
    const int64_t fitted_step = last_step - static_cast<int64_t>(buffered.size() - prefix);
    batch.events.push_back({id, fitted_step, EventKind::kModelChosen, ModelDetail(*choice, prefix)});
    batch.models.push_back({id, fitted_step, *choice, "warmup", std::nullopt});
    for (size_t i = prefix; i < buffered.size(); ++i) {
      const int64_t step = last_step - static_cast<int64_t>(buffered.size() - 1 - i);
      const AlignedStep aligned{std::isnan(buffered[i]) ? StepKind::kGap : StepKind::kValue, step, buffered[i]};
      if (series[id].warming_up) ApplyWarmup(id, aligned);
      else ApplyActive(id, aligned);
    }
  }

  void Reseed(SeriesId id, int64_t step) {
    SeriesRuntime& s = series[id];
    ++counters.reseeds;
    s.warming_up = true;
    s.fit_pending = false;
    ++s.epoch;
    s.banded = nullptr;
    s.state = model::State();
    s.alerts.Reset();
    s.warmup_values.clear();
    s.next_fit_at = rules[s.rules_index].rules.warmup;
    batch.events.push_back({id, step, EventKind::kReseeded, "{\"reason\":\"silence longer than max_gap\"}"});
  }

  void ApplyActive(SeriesId id, const AlignedStep& step) {
    SeriesRuntime& s = series[id];
    const ResolvedRules& rr = rules[s.rules_index];
    if (step.kind == StepKind::kGap) {
      model::SelectUpdate(s.spec)(s.params, s.state, kNaN);
      return;
    }
    // One prediction serves the band, the flag and the update (same bits as PointForecast +
    // OneStepBand + PolicyInput + UpdateFn, which InstallModel's catch-up uses).
    const double y = step.value;
    const model::BandedStep r = s.banded(s.params, s.state, y, model::BandRule{rr.z, s.band_sd, rr.policy});
    if (!r.valid) [[unlikely]] {
      // The model has left the region where it means anything: start over from this point.
      Reseed(id, step.step);
      ApplyWarmup(id, step);
      return;
    }
    const bool flagged = r.flagged;
    const int64_t time_ms = StepTime(rr.rules, step.step);
    if (flagged) {
      ++counters.flags;
      const double mu = r.mu;
      const double sigma = std::sqrt(s.state.sigma2);
      const double innovation = s.spec.error == model::ErrorType::kMultiplicative ? (y - mu) / mu : y - mu;
      batch.flags.push_back(FlagRecord{id, step.step, time_ms, y, mu, r.lower, r.upper, rr.rules.band_level,
                                       sigma > 0 ? innovation / sigma : 0.0, s.spec});
    }
    switch (s.alerts.Observe(flagged, rr.alert)) {
      case AlertTransition::kRaised:
        ++counters.alerts_raised;
        batch.alerts.push_back({id, step.step, time_ms, AlertKind::kRaised});
        break;
      case AlertTransition::kCleared:
        ++counters.alerts_cleared;
        batch.alerts.push_back({id, step.step, time_ms, AlertKind::kCleared});
        break;
      case AlertTransition::kNone: break;
    }
  }

  void ApplyWarmup(SeriesId id, const AlignedStep& step) {
    SeriesRuntime& s = series[id];
    s.warmup_values.push_back(step.value);
    if (s.fit_pending) {
      // The background fit is late: fit inline once rather than buffer without bound.
      if (s.warmup_values.size() > static_cast<size_t>(rules[s.rules_index].rules.history)) TryFit(id, step.step);
      return;
    }
    if (step.kind != StepKind::kValue || CountObserved(s.warmup_values) < s.next_fit_at) return;
    if (opts.background_warmup) MaybeRequestWarmup(id);
    else TryFit(id, step.step);
  }

  void Apply(SeriesId id, const AlignedStep& step) {
    SeriesRuntime& s = series[id];
    ++counters.steps;
    if (step.kind == StepKind::kReseed) {
      --counters.steps;
      Reseed(id, step.step);
      return;
    }
    batch.history.push_back({id, step.step, step.value});
    if (s.warming_up) ApplyWarmup(id, step);
    else ApplyActive(id, step);
  }

  // `hash` is SeriesIndex::Hash(rec.series).
  void ObserveRecord(const Observation& rec, uint64_t hash) {
    raw = rec.raw;
    stream_index = rec.stream_index;
    offset = rec.offset;
    if (!std::isfinite(rec.value)) [[unlikely]] {
      DeadLetter("value of series '" + std::string(rec.series) + "' is not a finite number",
                 StatusCode::kInvalidArgument);
      return;
    }
    std::optional<SeriesId> id = Find(rec.series, hash);
    if (!id) id = Create(rec.series, hash);
    if (id) Observe(*id, rec.time_ms, rec.value);
  }

  void Observe(SeriesId id, int64_t time_ms, double value) {
    SeriesRuntime& s = series[id];
    const ResolvedRules& rr = rules[s.rules_index];
    if (!s.warming_up && s.spec.needs_positive_data() && value <= 0.0) {
      DeadLetter("value " + FormatJsonNumber(value) + " <= 0 for series '" + s.name + "' with multiplicative form " +
                     s.spec.Notation() + "; series queued for an additive refit",
                 StatusCode::kOutOfRange);
      if (!s.additive_only) {
        s.additive_only = true;
        batch.events.push_back({id, s.aligner.last_step(), EventKind::kRefitQueued, "{\"reason\":\"non-positive value\"}"});
        refit_requests.push_back(id);
        MarkDirty(id);
      }
      return;
    }
    record_time_ms = time_ms;
    const AlignOutcome outcome =
        s.aligner.Offer(rr.rules, time_ms, value, [&](const AlignedStep& step) { Apply(id, step); });
    switch (outcome) {
      case AlignOutcome::kAccepted:
        ++counters.observations;
        ++batch.observations;
        s.last_time_ms = time_ms;
        MarkDirty(id);
        break;
      case AlignOutcome::kLate:
        DeadLetter("late: time " + std::to_string(time_ms) + " of series '" + s.name + "' falls in step " +
                       std::to_string(time_ms / std::max<int64_t>(1, rr.rules.interval_ms)) +
                       ", which is already closed (last step " + std::to_string(s.aligner.last_step()) + ")",
                   StatusCode::kOutOfRange);
        break;
      case AlignOutcome::kDuplicate:
        DeadLetter("duplicate: series '" + s.name + "' already has a value for step " +
                       std::to_string(s.aligner.last_step()),
                   StatusCode::kOutOfRange);
        break;
    }
  }
};

Engine::Engine(EngineOptions options, ModelChooser chooser, Clock* clock) : options_(std::move(options)) {
  if (!chooser) throw std::invalid_argument("engine needs a model chooser");
  if (clock == nullptr) throw std::invalid_argument("engine needs a clock");
  impl_ = std::make_unique<Impl>(options_, std::move(chooser), clock, counters_);
  for (size_t i = 0; i < options_.profiles.size(); ++i) {
    const SeriesRules& r = options_.profiles[i];
    const std::string where = "profile[" + std::to_string(i) + "] ('" + r.match + "')";
    if (!(r.band_level > 0.0 && r.band_level < 1.0))
      throw std::invalid_argument(where + ": band level must be in (0, 1)");
    if (Status glob = ValidateGlob(r.match); !glob.ok()) throw std::invalid_argument(where + ": " + glob.message());
    if (r.breach_run < 1 || r.breach_window < r.breach_run || r.breach_window > 64)
      throw std::invalid_argument(where + ": need 1 <= breach_run <= breach_window <= 64");
    if (r.clear_run < 1) throw std::invalid_argument(where + ": clear_run must be >= 1");
    if (r.period < 1) throw std::invalid_argument(where + ": period must be >= 1");
    if (r.warmup < 2) throw std::invalid_argument(where + ": warmup must be >= 2");
    if (r.interval_ms < 0) throw std::invalid_argument(where + ": interval must not be negative");
    if (r.history < r.warmup) throw std::invalid_argument(where + ": history must be >= warmup");
    impl_->rules.push_back(ResolvedRules{r, AlertRule{r.breach_run, r.breach_window, r.clear_run},
                                         model::TwoSidedZ(100.0 * r.band_level),
                                         static_cast<model::BandPolicy>(static_cast<uint8_t>(r.policy))});
    if (r.aggregate != AggregateKind::kNone && r.interval_ms > 0) impl_->any_aggregated = true;
  }
}

Engine::~Engine() = default;

void Engine::Observe(std::string_view series, int64_t time_ms, double value, std::string_view raw,
                     int32_t stream_index, int64_t offset) {
  impl_->ObserveRecord(Observation{series, time_ms, value, raw, stream_index, offset}, SeriesIndex::Hash(series));
}

void Engine::ObserveBatch(std::span<const Observation> records) {
  // Applying a record waits on memory three times in a row (index slot, series record, seasonal
  // slot), each a likely cache miss with many series. Records are independent until applied, so
  // the loop starts those loads for records ahead: slots kSlotAhead records ahead, series records
  // kSeriesAhead ahead (from the slot's tag match), seasonal slots kSeasonAhead ahead.
  constexpr size_t kSlotAhead = 24, kSeriesAhead = 16, kSeasonAhead = 8;
  Impl& im = *impl_;
  const size_t n = records.size();
  im.hashes.resize(n);
  im.guesses.assign(n, Impl::kNoGuess);
  for (size_t i = 0; i < n; ++i) im.hashes[i] = SeriesIndex::Hash(records[i].series);
  for (size_t i = 0; i < std::min(n, kSlotAhead); ++i) im.index.Prefetch(im.hashes[i]);
  for (size_t i = 0; i < n; ++i) {
    if (i + kSlotAhead < n) im.index.Prefetch(im.hashes[i + kSlotAhead]);
    if (i + kSeriesAhead < n) {
      if (std::optional<SeriesId> guess = im.index.Candidate(im.hashes[i + kSeriesAhead])) {
        im.guesses[i + kSeriesAhead] = *guess;
        im.PrefetchSeries(*guess);
      }
    }
    if (i + kSeasonAhead < n && im.guesses[i + kSeasonAhead] != Impl::kNoGuess)
      im.PrefetchSeason(im.guesses[i + kSeasonAhead]);
    im.ObserveRecord(records[i], im.hashes[i]);
  }
}

void Engine::RejectRecord(std::string_view raw, const Status& why, int32_t stream_index, int64_t offset) {
  impl_->raw = raw;
  impl_->stream_index = stream_index;
  impl_->offset = offset;
  impl_->DeadLetter(why.message(), why.code());
}

void Engine::AdvanceClock(int64_t now_ms) {
  Impl& im = *impl_;
  if (!im.any_aggregated) return;  // only aggregated grids close by the clock
  im.raw = {};
  im.stream_index = -1;
  im.offset = -1;
  for (SeriesId id = 0; id < im.series.size(); ++id) {
    SeriesRuntime& s = im.series[id];
    const SeriesRules& r = im.rules[s.rules_index].rules;
    if (r.aggregate == AggregateKind::kNone || r.interval_ms <= 0) continue;
    const int64_t before = s.aligner.last_step();
    im.record_time_ms = now_ms;
    s.aligner.AdvanceClock(r, now_ms, [&](const AlignedStep& step) { im.Apply(id, step); });
    if (s.aligner.last_step() != before) im.MarkDirty(id);
  }
}

EngineBatch Engine::TakeBatch(EngineBatch recycled) {
  recycled.Clear();
  EngineBatch out = std::exchange(impl_->batch, std::move(recycled));
  // The next batch is most likely as big as this one: size it once instead of growing it.
  impl_->batch.history.reserve(out.history.size());
  impl_->batch.dirty.reserve(out.dirty.size());
  for (SeriesId id : out.dirty) impl_->series[id].dirty = false;
  return out;
}

std::vector<SeriesId> Engine::TakeRefitRequests() { return std::exchange(impl_->refit_requests, {}); }

std::vector<WarmupRequest> Engine::TakeWarmupRequests() { return std::exchange(impl_->warmup_requests, {}); }

Status Engine::CompleteWarmup(SeriesId id, uint32_t epoch, const Result<ModelChoice>& choice) {
  Impl& im = *impl_;
  SeriesRuntime& s = im.series[id];
  if (!s.warming_up || !s.fit_pending || s.epoch != epoch)
    return Status::Aborted("warm-up fit of series '" + s.name + "' is stale (re-seeded or fitted since)");
  im.raw = {};
  im.stream_index = -1;
  im.offset = -1;
  ++counters_.fits;
  im.FinishWarmup(id, s.aligner.last_step(), WarmupPrefix(s.warmup_values, s.next_fit_at), choice);
  return Status::Ok();
}

Status Engine::InstallModel(SeriesId id, const ModelChoice& choice, std::span<const double> history,
                            std::string_view reason, size_t live_from) {
  Impl& im = *impl_;
  SeriesRuntime& s = im.series[id];
  if (s.warming_up) return Status::InvalidArgument("series '" + s.name + "' is still warming up");
  const ResolvedRules& rr = im.rules[s.rules_index];
  model::State replayed = choice.initial;
  const model::UpdateFn update = model::SelectUpdate(choice.spec);
  const double sigma = std::sqrt(choice.initial.sigma2);  // as Install sets it, so bands match the live path
  for (size_t i = 0; i < history.size(); ++i) {
    double v = history[i];
    if (i >= live_from && !std::isnan(v)) {
      const double mu = model::PointForecast(choice.spec, choice.params, replayed, 1);
      if (!std::isfinite(mu) || (choice.spec.needs_positive_data() && mu <= 0.0))
        return Status::NumericFailure("catch-up of series '" + s.name + "' under " + choice.spec.Notation() +
                                      " left the model's region");
      bool flagged = false;
      v = PolicyInput(rr.rules.policy, v, model::OneStepBand(choice.spec, mu, sigma * sigma, rr.z), flagged);
    }
    const model::StepResult r = update(choice.params, replayed, v);
    if (!std::isfinite(r.mu))
      return Status::NumericFailure("replay of series '" + s.name + "' under " + choice.spec.Notation() +
                                    " produced a non-finite forecast");
  }
  const model::ModelSpec previous = s.spec;  // InstallModel refuses a series still warming up
  im.Install(id, choice);
  s.state = std::move(replayed);
  im.batch.events.push_back({id, s.aligner.last_step(), EventKind::kModelChosen, ModelDetail(choice, history.size())});
  im.batch.models.push_back({id, s.aligner.last_step(), choice, std::string(reason), previous});
  im.MarkDirty(id);
  return Status::Ok();
}

Status Engine::Refit(SeriesId id, std::span<const double> history, std::string_view reason) {
  Impl& im = *impl_;
  SeriesRuntime& s = im.series[id];
  ++counters_.fits;
  Result<ModelChoice> choice = im.chooser(history, im.rules[s.rules_index].rules, s.additive_only);
  if (!choice.ok()) {
    ++counters_.fit_failures;
    return choice.status().WithContext("refit of series '" + s.name + "'");
  }
  return InstallModel(id, *choice, history, reason);
}

std::string Engine::EncodeCheckpoint(SeriesId id) const {
  const SeriesRuntime& s = impl_->series[id];
  const size_t state_bytes = s.warming_up ? 0 : model::EncodedStateBytes(s.state);
  // Six flag bytes, the period, four parameters, two times, the warm-up count, three length
  // prefixes, then the three parts: reserved at once.
  constexpr size_t kFixedBytes = 6 + 4 + 4 * 8 + 2 * 8 + 4 + 3 * 4;
  ByteWriter w;
  w.Reserve(kFixedBytes + StepAligner::kEncodedBytes + AlertTracker::kEncodedBytes + state_bytes);
  w.Put<uint8_t>(kCheckpointVersion);
  w.Put<uint8_t>(s.warming_up ? 1 : 0);
  w.Put<uint8_t>(s.additive_only ? 1 : 0);
  w.Put<uint8_t>(static_cast<uint8_t>(s.spec.error));
  w.Put<uint8_t>(static_cast<uint8_t>(s.spec.trend));
  w.Put<uint8_t>(static_cast<uint8_t>(s.spec.season));
  w.Put<int32_t>(s.spec.period);
  w.Put(s.params.alpha);
  w.Put(s.params.beta);
  w.Put(s.params.gamma);
  w.Put(s.params.phi);
  w.Put(s.last_time_ms);
  w.Put(s.next_fit_at);
  w.Put<uint32_t>(static_cast<uint32_t>(s.warmup_values.size()));
  w.PutLength(StepAligner::kEncodedBytes);
  s.aligner.EncodeTo(w);
  w.PutLength(AlertTracker::kEncodedBytes);
  s.alerts.EncodeTo(w);
  w.PutLength(state_bytes);
  if (!s.warming_up) model::AppendState(s.state, w.str());
  return w.Take();
}

namespace {

struct DecodedCheckpoint {
  CheckpointView view;
  StepAligner aligner;
  AlertTracker alerts;
  int64_t next_fit_at = 0;
};

Result<DecodedCheckpoint> DecodeFull(std::string_view bytes) {
  DecodedCheckpoint out;
  CheckpointView& v = out.view;
  ByteReader r(bytes);
  uint8_t version = 0, warming = 0, additive = 0, error = 0, trend = 0, season = 0;
  int32_t period = 1;
  std::string_view aligner_bytes, alert_bytes, state_bytes;
  const bool read = r.Get(version) && r.Get(warming) && r.Get(additive) && r.Get(error) && r.Get(trend) &&
                    r.Get(season) && r.Get(period) && r.Get(v.params.alpha) && r.Get(v.params.beta) &&
                    r.Get(v.params.gamma) && r.Get(v.params.phi) && r.Get(v.last_time_ms) && r.Get(out.next_fit_at) &&
                    r.Get(v.warmup_points) && r.GetBytes(aligner_bytes) && r.GetBytes(alert_bytes) &&
                    r.GetBytes(state_bytes) && r.remaining() == 0;
  if (!read || version != kCheckpointVersion || warming > 1 || additive > 1 || error > 1 || trend > 4 || season > 2)
    return Status::Corruption("checkpoint is truncated or of an unknown version");
  if (!out.aligner.Decode(aligner_bytes) || !out.alerts.Decode(alert_bytes))
    return Status::Corruption("checkpoint has a bad alignment or alert section");
  v.warming_up = warming != 0;
  v.additive_only = additive != 0;
  v.spec = model::ModelSpec{static_cast<model::ErrorType>(error), static_cast<model::TrendType>(trend),
                            static_cast<model::SeasonType>(season), period};
  v.last_step = out.aligner.last_step();
  v.open_bucket_step = out.aligner.open_step();
  v.alert_active = out.alerts.active();
  if (!v.warming_up) {
    Result<model::State> state = model::DecodeState(state_bytes);
    if (!state.ok()) return state.status();
    v.state = std::move(state).value();
  }
  return out;
}

}  // namespace

Result<CheckpointView> DecodeCheckpoint(std::string_view bytes) {
  Result<DecodedCheckpoint> full = DecodeFull(bytes);
  if (!full.ok()) return full.status();
  return std::move(full->view);
}

Status Engine::RestoreSeries(std::string_view name, std::string_view checkpoint,
                             const HistoryFetcher& warmup_history) {
  Impl& im = *impl_;
  const std::string where = "checkpoint of series '" + std::string(name) + "'";
  Result<DecodedCheckpoint> decoded = DecodeFull(checkpoint);
  if (!decoded.ok()) return decoded.status().WithContext(where);
  im.raw = {};
  const uint64_t hash = SeriesIndex::Hash(name);
  std::optional<SeriesId> id = im.Find(name, hash);
  if (!id) id = im.Create(name, hash);
  // Creation during restore is not new work to commit.
  im.batch = EngineBatch();
  if (!id) return Status::NotFound("no profile matches stored series '" + std::string(name) + "'");
  SeriesRuntime& s = im.series[*id];
  s.dirty = false;  // the cleared batch no longer lists it; the next change must add it again
  CheckpointView& v = decoded->view;
  if (v.warming_up && v.warmup_points > 0) {
    Result<std::vector<double>> history = warmup_history();
    if (!history.ok()) return history.status().WithContext(where);
    if (history->size() < v.warmup_points)
      return Status::Corruption(where + " needs " + std::to_string(v.warmup_points) +
                                " warm-up points but history has " + std::to_string(history->size()));
    s.warmup_values.assign(history->end() - v.warmup_points, history->end());
  }
  s.warming_up = v.warming_up;
  s.additive_only = v.additive_only;
  s.spec = v.spec;
  s.params = v.params;
  s.last_time_ms = v.last_time_ms;
  s.next_fit_at = decoded->next_fit_at;
  s.aligner = decoded->aligner;
  s.alerts = decoded->alerts;
  if (!s.warming_up) {
    s.state = std::move(v.state);
    s.banded = model::SelectBandedUpdate(s.spec);
    s.band_sd = BandSd(s.state.sigma2);
  } else if (im.opts.background_warmup) {
    im.MaybeRequestWarmup(*id);  // the request an uninterrupted run had out (same buffered prefix)
  }
  return Status::Ok();
}

const std::string& Engine::SeriesName(SeriesId id) const { return impl_->series[id].name; }

Engine::Position Engine::SeriesPosition(SeriesId id) const {
  const SeriesRuntime& s = impl_->series[id];
  return Position{s.aligner.last_step(), s.last_time_ms};
}

std::optional<SeriesId> Engine::FindSeries(std::string_view name) const {
  return impl_->Find(name, SeriesIndex::Hash(name));
}

size_t Engine::series_count() const { return impl_->series.size(); }

SeriesView Engine::View(SeriesId id) const {
  const SeriesRuntime& s = impl_->series[id];
  SeriesView v{id, s.name, impl_->rules[s.rules_index].rules.match, s.warming_up, s.aligner.last_step(),
               std::nullopt, s.params, s.state, s.alerts.active(), s.additive_only};
  if (!s.warming_up) v.form = s.spec;
  return v;
}

size_t Engine::ResidentBytes() const {
  const Impl& im = *impl_;
  size_t bytes = im.series.capacity() * sizeof(SeriesRuntime);
  for (const SeriesRuntime& s : im.series) {
    bytes += s.name.capacity() > 15 ? s.name.capacity() + 1 : 0;  // beyond the small-string buffer
    bytes += s.state.season.capacity() * sizeof(double);
    bytes += s.warmup_values.capacity() * sizeof(double);
  }
  bytes += im.index.ResidentBytes();
  return bytes;
}

}  // namespace plimsoll::stream
