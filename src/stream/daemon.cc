#include "plimsoll/stream/daemon.h"

#include <spdlog/spdlog.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <functional>
#include <iterator>
#include <span>
#include <string>
#include <map>
#include <utility>

#include "plimsoll/stream/config.h"
#include "stream/bucket_clock.h"
#include "stream/commit_writer.h"

namespace plimsoll::stream {
namespace {

std::string_view EventKindName(EventKind kind) {
  switch (kind) {
    case EventKind::kModelChosen: return "model_chosen";
    case EventKind::kReseeded: return "reseeded";
    case EventKind::kFitFailed: return "fit_failed";
    case EventKind::kRefitQueued: return "refit_queued";
    case EventKind::kCreated: return "created";
  }
  return "unknown";
}

double IfUsed(bool used, double value) { return used ? value : store::kNoValue; }

}  // namespace

namespace {

constexpr uint32_t kNoSlot = UINT32_MAX;

// What the daemon carries from one group commit to the next checkpoint (owner thread only).
struct Pending {
  // Positions reached by records taken into the engine, by stream index, not yet checkpointed.
  std::vector<int64_t> next_offsets;
  std::vector<bool> offset_changed;
  // Series changed since the last checkpoint, each once (is_dirty by SeriesId).
  std::vector<SeriesId> dirty;
  std::vector<uint8_t> is_dirty;
  // Events and dead letters are not idempotent: they wait for the checkpoint, which also stores
  // the positions past the records that caused them, so a restart never writes them twice.
  std::vector<store::EventRecord> events;
  std::vector<store::DeadLetterRecord> dead_letters;
  size_t records = 0;  // records polled since the last checkpoint
  int64_t last_checkpoint_ns = 0;
  // A refit was installed after the last commit was encoded: the next commit is a checkpoint (an
  // install is not re-derived from the input, so a restart must not start before it).
  bool installed_since_checkpoint = false;
  std::vector<uint32_t> history_slot;  // ToStoreBatch scratch by SeriesId, kNoSlot between calls
  // By SeriesId: a durable commit named the series with its id as hint, so later history entries
  // go unnamed (store::kMaxHint): the owner copied a name per series per commit, and the writer
  // compared it.
  std::vector<uint8_t> store_knows;

  void LearnNamed(const store::HistoryBatch& durable) {
    for (size_t k = 0; k < durable.hints.size(); ++k) {
      const uint32_t hint = durable.hints[k];
      if (hint >= store::kMaxHint || durable.series[k].empty()) continue;
      if (hint >= store_knows.size()) store_knows.resize(std::max<size_t>(hint + 1, store_knows.size() * 9 / 8), 0);
      store_knows[hint] = 1;
    }
  }
  // Batches done with, kept for their buffers: the next TakeBatch and ToStoreBatch reuse them
  // instead of mapping megabytes afresh at every commit.
  EngineBatch spare_engine_batch;
  store::CommitBatch spare_commit_batch;

  void AddDirty(std::span<const SeriesId> ids) {
    for (SeriesId id : ids) {
      if (id >= is_dirty.size()) is_dirty.resize(std::max<size_t>(id + 1, is_dirty.size() * 9 / 8), 0);
      if (is_dirty[id] == 0) {
        is_dirty[id] = 1;
        dirty.push_back(id);
      }
    }
  }
};

}  // namespace

struct Daemon::Impl : PartitionListener {
  void OnAssign(std::span<const StreamId> streams) override {
    for (const StreamId& s : streams) spdlog::info("assigned {}[{}]", s.name, s.partition);
  }
  void OnRevoke(std::span<const StreamId> streams) override {
    for (const StreamId& s : streams) spdlog::info("revoking {}[{}]: committing what was read", s.name, s.partition);
    if (flush_for_revoke) {
      Status flushed = flush_for_revoke();
      if (!flushed.ok()) spdlog::error("commit before revoke failed: {}", flushed.ToString());
    }
  }

  std::function<Status()> flush_for_revoke;  // set while Run is active
  Clock* clock;
  std::string store_path;
  std::unique_ptr<CommitWriter> writer;
  std::unique_ptr<store::Store> reader;  // read-only connection for history reads (refits)
  std::unique_ptr<RefitService> refits;  // background refits; null: additive refits inline
  // Durable positions (owner thread only): what sources resume from.
  std::map<std::pair<std::string, int32_t>, int64_t> durable_positions;
  Pending pending;
};

Daemon::Daemon(const DaemonOptions& options, std::unique_ptr<Engine> engine, std::string store_path, Clock* clock)
    : options_(options), engine_(std::move(engine)), impl_(std::make_unique<Impl>()) {
  impl_->clock = clock;
  impl_->store_path = std::move(store_path);
}

Daemon::~Daemon() = default;

Result<std::unique_ptr<Daemon>> Daemon::Open(const DaemonOptions& options, EngineOptions engine_options,
                                             ModelChooser chooser, std::unique_ptr<store::Store> store,
                                             Clock* clock, std::unique_ptr<RefitService> refits) {
  if (!refits) engine_options.background_warmup = false;
  auto engine = std::make_unique<Engine>(std::move(engine_options), std::move(chooser), clock);
  std::unique_ptr<Daemon> daemon(new Daemon(options, std::move(engine), store->options().path, clock));
  size_t restored = 0, skipped = 0;
  std::vector<RestoredSeries> restored_series;
  Status load = store->ForEachSeries([&](const store::StoredSeries& stored) -> Status {
    if (!stored.state) return Status::Ok();
    const std::string& name = stored.series.name;
    auto fetch = [&]() -> Result<std::vector<double>> {
      // History may be durable beyond the checkpoint (group commits between checkpoints): take the
      // steps through the checkpoint's own.
      Result<store::HistorySlice> slice =
          store->HistoryTail(name, static_cast<size_t>(options.history_restore_points), stored.state->step);
      if (!slice.ok()) return slice.status();
      return std::move(slice->values);
    };
    Status s = daemon->engine_->RestoreSeries(name, stored.state->encoded, fetch);
    if (s.code() == StatusCode::kNotFound) {
      spdlog::warn("stored series '{}' skipped: {}", name, s.message());
      ++skipped;
      return Status::Ok();
    }
    if (s.ok()) {
      ++restored;
      if (std::optional<SeriesId> id = daemon->engine_->FindSeries(name))
        restored_series.push_back({*id, stored.series.profile, stored.model ? stored.model->fitted_ms : 0,
                                   stored.model ? stored.model->aicc : store::kNoValue});
    }
    return s;
  });
  if (!load.ok()) return load.WithContext("loading stored series");
  for (const store::PositionRecord& p : store->Positions())
    daemon->impl_->durable_positions[{p.stream, p.partition}] = p.next_offset;
  spdlog::info("store {}: {} series restored, {} skipped, {} source positions", store->options().path, restored,
               skipped, daemon->impl_->durable_positions.size());
  store::StoreOptions read_options = store->options();
  read_options.read_only = true;
  Result<std::unique_ptr<store::Store>> reader = store::Store::Open(read_options);
  if (!reader.ok()) return reader.status().WithContext("opening a read connection");
  daemon->impl_->reader = std::move(reader).value();
  daemon->impl_->writer = std::make_unique<CommitWriter>(std::move(store), clock);
  if (refits) {
    refits->Start(*daemon->engine_, restored_series);
    daemon->impl_->refits = std::move(refits);
  }
  return daemon;
}

PositionLookup Daemon::Positions() const {
  const Impl* impl = impl_.get();
  return [impl](const StreamId& stream) -> std::optional<int64_t> {
    auto it = impl->durable_positions.find({stream.name, stream.partition});
    if (it == impl->durable_positions.end()) return std::nullopt;
    return it->second;
  };
}

void Daemon::RefitQueued(SeriesId id) {
  const std::string& name = engine_->SeriesName(id);
  Result<store::HistorySlice> history =
      impl_->reader->HistoryTail(name, static_cast<size_t>(options_.history_restore_points));
  Status status = history.ok() ? engine_->Refit(id, history->values, "additive refit after a non-positive value")
                               : history.status();
  if (status.ok()) {
    counters_.refits.fetch_add(1, std::memory_order_relaxed);
    spdlog::info("series '{}': additive refit installed ({} points)", name, history->values.size());
  } else {
    counters_.refit_failures.fetch_add(1, std::memory_order_relaxed);
    spdlog::warn("series '{}': additive refit failed, current model kept: {}", name, status.ToString());
  }
}

PartitionListener* Daemon::Listener() { return impl_.get(); }

store::StoreCounters Daemon::StoreCounters() const { return impl_->writer->StoreCounters(); }

const RefitService* Daemon::refits() const { return impl_->refits.get(); }

namespace {

// Turns the engine's id-keyed batch into the store's rows (names, encoded checkpoints).
// Everything but states and positions (CompleteBatch adds those at a checkpoint).
// Moves only the dead letters' payloads out of `batch`.
store::CommitBatch ToStoreBatch(const Engine& engine, EngineBatch& batch, int64_t now_ms,
                                std::span<const StreamId> streams, Pending& pending) {
  store::CommitBatch out = std::move(pending.spare_commit_batch);
  out.Clear();
  const auto name = [&](SeriesId id) -> const std::string& { return engine.SeriesName(id); };
  for (const EngineEvent& e : batch.events) {
    if (e.kind == EventKind::kCreated)
      out.series.push_back({name(e.series), engine.View(e.series).profile, now_ms});
    out.events.push_back({now_ms, name(e.series), std::string(EventKindName(e.kind)), e.detail});
  }
  for (const ModelChange& m : batch.models) {
    const model::ModelSpec& f = m.choice.spec;
    out.models.push_back(store::ModelRecord{name(m.series), f.Notation(), f.period, m.choice.params.alpha,
                                            IfUsed(f.has_trend(), m.choice.params.beta),
                                            IfUsed(f.has_season(), m.choice.params.gamma),
                                            IfUsed(f.damped(), m.choice.params.phi), m.choice.initial.sigma2,
                                            m.choice.loglik, m.choice.aicc, now_ms, m.reason, m.step,
                                            m.previous ? m.previous->Notation() : std::string()});
  }
  // Each series once per commit (named until the store knows its id); points refer to it by index.
  std::vector<uint32_t>& history_slot = pending.history_slot;
  if (history_slot.size() < engine.series_count()) history_slot.resize(engine.series_count(), kNoSlot);
  const std::vector<uint8_t>& known = pending.store_knows;
  out.history.points.reserve(batch.history.size());
  // Slots are read at random over megabytes at 100k series: fetch a later point's while this one
  // is copied.
  constexpr size_t kAhead = 8;
  for (size_t k = 0; k < batch.history.size(); ++k) {
    if (k + kAhead < batch.history.size()) {
      const SeriesId later = batch.history[k + kAhead].series;
      __builtin_prefetch(&history_slot[later]);
      if (later < known.size()) __builtin_prefetch(&known[later]);
    }
    const HistoryPoint& h = batch.history[k];
    uint32_t& slot = history_slot[h.series];
    if (slot == kNoSlot) {
      slot = static_cast<uint32_t>(out.history.series.size());
      if (h.series < known.size() && known[h.series] != 0) {
        out.history.series.emplace_back();
      } else {
        out.history.series.push_back(name(h.series));
      }
      out.history.hints.push_back(h.series);  // SeriesIds are dense: the store's name-lookup hint
    }
    out.history.points.push_back({slot, h.step, h.value});
  }
  for (const HistoryPoint& h : batch.history) history_slot[h.series] = kNoSlot;
  for (const FlagRecord& f : batch.flags) {
    out.flags.push_back(store::FlagRecord{name(f.series), f.step, f.time_ms, f.value, f.expected, f.lower, f.upper,
                                          f.level, f.score, f.form.Notation()});
    out.flag_hints.push_back(f.series);
  }
  for (const AlertRecord& a : batch.alerts)
    out.alerts.push_back(store::AlertRecord{
        name(a.series), a.step, a.time_ms,
        a.kind == AlertKind::kRaised ? store::AlertKind::kRaised : store::AlertKind::kCleared, "{}"});
  for (DeadLetter& d : batch.dead_letters) {
    const bool from_stream = d.stream_index >= 0 && static_cast<size_t>(d.stream_index) < streams.size();
    out.dead_letters.push_back(store::DeadLetterRecord{
        now_ms, from_stream ? streams[d.stream_index].name : std::string(),
        from_stream ? streams[d.stream_index].partition : 0, d.offset, std::move(d.raw), std::move(d.reason),
        static_cast<int32_t>(d.code)});
  }
  return out;
}

// Between checkpoints: holds the batch's events and dead letters for the next checkpoint; the
// rest (series and model upserts, history, flags and alerts with their ids) is idempotent, so a
// restart from the last checkpoint re-derives it identically. At a checkpoint: adds what was
// held, the states of every series changed since the last checkpoint and the positions.
void CompleteBatch(const Engine& engine, store::CommitBatch& out, std::span<const StreamId> streams, Pending& pending,
                   bool checkpoint) {
  if (!checkpoint) {
    std::move(out.events.begin(), out.events.end(), std::back_inserter(pending.events));
    std::move(out.dead_letters.begin(), out.dead_letters.end(), std::back_inserter(pending.dead_letters));
    out.events.clear();
    out.dead_letters.clear();
    return;
  }
  if (!pending.events.empty()) {
    std::move(out.events.begin(), out.events.end(), std::back_inserter(pending.events));
    out.events = std::exchange(pending.events, {});
  }
  if (!pending.dead_letters.empty()) {
    std::move(out.dead_letters.begin(), out.dead_letters.end(), std::back_inserter(pending.dead_letters));
    out.dead_letters = std::exchange(pending.dead_letters, {});
  }
  out.states.reserve(pending.dirty.size());
  // In id order: the engine's series are then read front to back, not at random (a checkpoint of
  // 100k series spent most of its time waiting on memory), and the store's key order is id order.
  std::sort(pending.dirty.begin(), pending.dirty.end());
  for (SeriesId id : pending.dirty) {
    const Engine::Position pos = engine.SeriesPosition(id);
    out.states.push_back({engine.SeriesName(id), pos.last_step, pos.last_time_ms, engine.EncodeCheckpoint(id), id});
    pending.is_dirty[id] = 0;
  }
  pending.dirty.clear();
  for (size_t i = 0; i < pending.offset_changed.size() && i < streams.size(); ++i) {
    if (!pending.offset_changed[i]) continue;
    out.positions.push_back({streams[i].name, streams[i].partition, pending.next_offsets[i]});
    pending.offset_changed[i] = false;
  }
}

}  // namespace

Status Daemon::Run(RecordSource& source, RecordDecoder& decoder, const std::atomic<bool>& stop, OutputSink* sink) {
  Impl& im = *impl_;
  Clock* clock = im.clock;
  std::vector<RawRecord> records;
  records.reserve(options_.poll_records);
  // Decoded records of one poll, applied with one Engine::ObserveBatch. The decoder's series view
  // lasts one record, so the ids are copied into `names` (ends in `name_ends`).
  std::vector<Observation> observations;
  std::string names;
  std::vector<size_t> name_ends;
  const auto apply_decoded = [&] {
    for (size_t k = 0, begin = 0; k < observations.size(); begin = name_ends[k++])
      observations[k].series = std::string_view(names).substr(begin, name_ends[k] - begin);
    engine_->ObserveBatch(observations);
    observations.clear();
    names.clear();
    name_ends.clear();
  };
  size_t uncommitted = 0;
  int64_t last_commit_ns = clock->MonotonicNanos();
  int64_t last_clock_ns = last_commit_ns;
  int64_t last_reack_ns = last_commit_ns;
  constexpr int64_t kReacknowledgeNanos = 1'000'000'000;
  BucketClock bucket_clock(/*follow_wall=*/!options_.event_time);
  {
    // Restored series: a feed silent since the restart still gets its buckets closed.
    int64_t newest_restored_ms = INT64_MIN;
    for (SeriesId id = 0; id < engine_->series_count(); ++id)
      newest_restored_ms = std::max(newest_restored_ms, engine_->SeriesPosition(id).last_time_ms);
    if (newest_restored_ms != INT64_MIN) bucket_clock.OnRecords(newest_restored_ms, clock->WallMillis());
  }
  bool paused = false;
  int64_t paused_since_ns = 0;
  Status source_status;

  const auto handle_durable = [&](store::CommitBatch&& durable) {
    counters_.commits.fetch_add(1, std::memory_order_relaxed);
    std::vector<SourcePosition> acks;
    for (const store::PositionRecord& p : durable.positions) {
      im.durable_positions[{p.stream, p.partition}] = p.next_offset;
      acks.push_back({StreamId{p.stream, p.partition}, p.next_offset});
    }
    if (!acks.empty()) {
      Status ack = source.Acknowledge(acks);
      if (!ack.ok()) counters_.acknowledge_errors.fetch_add(1, std::memory_order_relaxed);
    }
    if (sink != nullptr) {
      Status published = sink->Publish(durable);
      if (!published.ok()) counters_.sink_errors.fetch_add(1, std::memory_order_relaxed);
    }
    im.pending.LearnNamed(durable.history);
    im.pending.spare_commit_batch = std::move(durable);  // its buffers serve the next commit
  };
  const auto take_durable = [&] {
    if (std::optional<store::CommitBatch> durable = im.writer->TakeDurable()) handle_durable(std::move(*durable));
  };
  // `checkpoint`: the commit must store states and positions (drain: shutdown, revoke, refits).
  // The refit service installs finished fits only after the commit's checkpoints are encoded:
  // what an install changes (model, catch-up flags and alerts, states) goes to the next commit,
  // which is then a checkpoint. A crash in between finds the series as before the install.
  const auto submit = [&](bool checkpoint) {
    EngineBatch taken = engine_->TakeBatch(std::move(im.pending.spare_engine_batch));
    Pending& pending = im.pending;
    pending.AddDirty(taken.dirty);
    pending.records += uncommitted;
    const int64_t now_ns = clock->MonotonicNanos();
    checkpoint = checkpoint || pending.installed_since_checkpoint ||
                 now_ns - pending.last_checkpoint_ns >= options_.checkpoint_ms * 1'000'000 ||
                 (options_.checkpoint_records_per_state > 0 &&
                  pending.dirty.size() * options_.checkpoint_records_per_state <= pending.records);
    store::CommitBatch batch = ToStoreBatch(*engine_, taken, clock->WallMillis(), source.Streams(), pending);
    CompleteBatch(*engine_, batch, source.Streams(), pending, checkpoint);
    if (checkpoint) {
      pending.records = 0;
      pending.last_checkpoint_ns = now_ns;
      pending.installed_since_checkpoint = false;
    }
    if (im.refits) {
      std::vector<store::EventRecord> refit_events;
      if (im.refits->OnBatch(*engine_, taken, clock->WallMillis(), refit_events) > 0)
        pending.installed_since_checkpoint = true;
      std::move(refit_events.begin(), refit_events.end(), std::back_inserter(pending.events));
    }
    if (!batch.empty()) {
      // The writer holds a written batch until it is taken, and only then writes the next: take
      // it while waiting for the slot (drain submits twice in a row).
      while (im.writer->busy()) {
        take_durable();
        if (im.writer->busy()) IgnoreError(im.writer->WaitDurable(50));
      }
      take_durable();
      im.writer->Submit(std::move(batch));
    }
    pending.spare_engine_batch = std::move(taken);
    uncommitted = 0;
    last_commit_ns = now_ns;
  };
  // Commits everything and waits until it is durable (shutdown, refits).
  const auto drain = [&](int64_t timeout_ms) -> Status {
    take_durable();
    // What was read since the last commit goes first, as an ordinary group commit: the writer
    // stores it while this thread encodes the checkpoint's states (100k series: ~0.05 s), instead
    // of after.
    submit(false);
    submit(true);
    const int64_t deadline = clock->MonotonicNanos() + timeout_ms * 1'000'000;
    while (im.writer->busy()) {
      take_durable();
      if (clock->MonotonicNanos() > deadline) return im.writer->WaitDurable(0);
      Status waited = im.writer->WaitDurable(50);
      take_durable();
      if (waited.ok()) continue;
    }
    take_durable();
    return Status::Ok();
  };
  const auto set_paused = [&](bool pause) {
    if (pause == paused) return;
    paused = pause;
    for (const StreamId& stream : source.Streams()) {
      Status s = pause ? source.Pause(stream) : source.Resume(stream);
      if (!s.ok()) spdlog::warn("{} of {}[{}] failed: {}", pause ? "pause" : "resume", stream.name, stream.partition,
                                s.ToString());
    }
    if (pause) {
      counters_.pauses.fetch_add(1, std::memory_order_relaxed);
      paused_since_ns = clock->MonotonicNanos();
    } else {
      counters_.paused_micros.fetch_add((clock->MonotonicNanos() - paused_since_ns) / 1000, std::memory_order_relaxed);
    }
  };

  im.flush_for_revoke = [&] { return drain(options_.shutdown_timeout_ms); };
  bool end_of_input = false;
  while (!stop.load(std::memory_order_relaxed) && !end_of_input) {
    take_durable();
    // While paused, Poll with max_records = 0 keeps the source alive without taking records.
    source_status = source.Poll(records, paused ? 0 : options_.poll_records, options_.poll_timeout_ms);
    if (source_status.code() == StatusCode::kAborted) {
      end_of_input = true;
    } else if (!source_status.ok()) {
      spdlog::error("source failed: {}", source_status.ToString());
      break;
    }
    const size_t stream_count = source.Streams().size();
    if (im.pending.next_offsets.size() < stream_count) {
      im.pending.next_offsets.resize(stream_count, 0);
      im.pending.offset_changed.resize(stream_count, false);
    }
    int64_t newest_record_ms = INT64_MIN;
    const bool padded = source.PayloadsPadded();
    for (const RawRecord& rec : records) {
      DecodedRecord decoded;
      Status status = padded ? decoder.DecodePadded(rec.key, rec.payload, rec.timestamp_ms, decoded)
                             : decoder.Decode(rec, decoded);
      if (!status.ok()) {
        apply_decoded();  // dead letters stay in record order
        counters_.decode_errors.fetch_add(1, std::memory_order_relaxed);
        engine_->RejectRecord(rec.payload, status, rec.stream_index, rec.offset);
      } else if (decoded.skip) {
        counters_.skipped_lines.fetch_add(1, std::memory_order_relaxed);
      } else {
        names.append(decoded.series);
        name_ends.push_back(names.size());
        observations.push_back({{}, decoded.time_ms, decoded.value, rec.payload, rec.stream_index, rec.offset});
        newest_record_ms = std::max(newest_record_ms, decoded.time_ms);
      }
      im.pending.next_offsets[rec.stream_index] = rec.next_offset;
      im.pending.offset_changed[rec.stream_index] = true;
    }
    apply_decoded();
    if (newest_record_ms != INT64_MIN) bucket_clock.OnRecords(newest_record_ms, clock->WallMillis());
    counters_.records.fetch_add(records.size(), std::memory_order_relaxed);
    if (!records.empty()) counters_.position.store(records.back().next_offset, std::memory_order_relaxed);
    uncommitted += records.size();

    const int64_t now_ns = clock->MonotonicNanos();
    if (now_ns - last_reack_ns >= kReacknowledgeNanos) {
      // Advisory commits can be refused (e.g. during a rebalance) and an idle feed makes no new
      // ones: repeat the durable positions of the streams still read, so Kafka's view catches up.
      last_reack_ns = now_ns;
      std::vector<SourcePosition> acks;
      for (const StreamId& stream : source.Streams()) {
        auto it = im.durable_positions.find({stream.name, stream.partition});
        if (it != im.durable_positions.end()) acks.push_back({stream, it->second});
      }
      if (!acks.empty() && !source.Acknowledge(acks).ok())
        counters_.acknowledge_errors.fetch_add(1, std::memory_order_relaxed);
    }
    if (now_ns - last_clock_ns >= options_.commit_ms * 1'000'000 / 2) {
      last_clock_ns = now_ns;
      if (std::optional<int64_t> bucket_now = bucket_clock.Now(clock->WallMillis())) engine_->AdvanceClock(*bucket_now);
    }
    const bool due = uncommitted >= options_.commit_records || now_ns - last_commit_ns >= options_.commit_ms * 1'000'000;
    if (due && !im.writer->busy()) {
      submit(false);
      set_paused(false);
    } else if (uncommitted >= options_.max_uncommitted_records) {
      set_paused(true);
      IgnoreError(im.writer->WaitDurable(options_.poll_timeout_ms));  // wait a little, then poll again
    }

    std::vector<SeriesId> refits = im.refits ? std::vector<SeriesId>() : engine_->TakeRefitRequests();
    if (!refits.empty()) {
      // History must be durable through each series' last step before it is read back.
      Status drained = drain(options_.shutdown_timeout_ms);
      if (!drained.ok()) {
        spdlog::error("additive refit postponed: {}", drained.ToString());
        continue;
      }
      for (SeriesId id : refits) RefitQueued(id);
    }
  }
  set_paused(false);
  if (im.refits) {
    // Running fits finish (each within its budget); the first drain installs them, the second
    // commits what the installs changed.
    im.refits->Stop(*engine_);
    Status installed = drain(options_.shutdown_timeout_ms);
    if (!installed.ok()) spdlog::error("commit before the last refit installs failed: {}", installed.ToString());
  }
  Status drained = drain(options_.shutdown_timeout_ms);
  im.flush_for_revoke = nullptr;
  if (!drained.ok()) {
    spdlog::error("final commit not durable: {}", drained.ToString());
    return drained;
  }
  if (sink != nullptr) {
    Status flushed = sink->Flush(static_cast<int>(options_.shutdown_timeout_ms));
    if (!flushed.ok()) {
      counters_.sink_errors.fetch_add(1, std::memory_order_relaxed);
      spdlog::warn("outputs not all delivered at shutdown (they are in SQLite): {}", flushed.ToString());
    }
  }
  if (source_status.ok() || source_status.code() == StatusCode::kAborted) return Status::Ok();
  return source_status;
}

}  // namespace plimsoll::stream

namespace plimsoll::stream {

EngineOptions EngineOptionsFromConfig(const Config& config) {
  EngineOptions out;
  out.create_series = config.series.create;
  out.max_series = static_cast<size_t>(config.series.max_count);
  out.background_warmup = config.refit.background_warmup;  // only with a refit service
  for (const ProfileOptions& p : config.profiles) {
    SeriesRules r;
    r.match = p.match;
    r.interval_ms = p.interval_ms.value_or(0);
    r.aggregate = p.aggregate;
    r.allowed_lateness_ms = p.allowed_lateness_ms;
    if (!p.max_gap_ms || r.interval_ms == 0) r.max_gap_steps = INT64_MAX;
    else r.max_gap_steps = std::max<int64_t>(1, *p.max_gap_ms / r.interval_ms);
    r.period = p.period;
    r.forms = p.forms;
    r.band_level = p.band;
    r.history = p.history;  // the config resolved period-dependent defaults and checked warmup <= history
    r.warmup = p.warmup;
    r.policy = p.policy;
    r.breach_run = config.band.breach_run;
    r.breach_window = config.band.breach_window > 0 ? config.band.breach_window : config.band.breach_run;
    r.clear_run = config.band.clear_run;
    out.profiles.push_back(std::move(r));
  }
  return out;
}

DaemonOptions DaemonOptionsFromConfig(const Config& config) {
  DaemonOptions out;
  out.commit_ms = config.store.commit_ms;
  out.commit_records = static_cast<size_t>(config.store.commit_records);
  // Input read since a checkpoint is read again after a crash; stdin cannot be, so there every
  // commit is a checkpoint (states never fall behind the history and flags already stored).
  out.checkpoint_ms = config.source.kind == SourceKind::kStdin ? 0 : config.store.checkpoint_ms;
  out.max_uncommitted_records = std::max<size_t>(out.commit_records * 20, 100'000);
  // A file is a replay: its own times drive bucket closing, so reruns give identical results.
  out.event_time = config.source.kind == SourceKind::kFile;
  int longest_history = 0;
  for (const ProfileOptions& p : config.profiles) longest_history = std::max(longest_history, p.history);
  out.history_restore_points = longest_history;
  return out;
}

}  // namespace plimsoll::stream
