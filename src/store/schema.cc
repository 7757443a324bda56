#include "store/schema.h"

#include <string>

namespace plimsoll::store {
namespace {

// Times are integer milliseconds since the Unix epoch (*_ms); steps are interval-grid indices.
// Foreign keys are declared for documentation; enforcement stays off (PRAGMA foreign_keys) because
// the single writer resolves every series name before writing and the checks would cost commit time.
constexpr Migration kMigrations[] = {
    {1, "core tables: series, model, state, flags, alerts, dead letters, events, source positions",
     R"sql(
CREATE TABLE series (
  id         INTEGER PRIMARY KEY,
  name       TEXT NOT NULL UNIQUE,
  profile    TEXT NOT NULL,
  created_ms INTEGER NOT NULL
);
CREATE TABLE model (
  series    INTEGER PRIMARY KEY REFERENCES series(id),
  spec      TEXT NOT NULL,
  period    INTEGER NOT NULL,
  alpha     REAL, beta REAL, gamma REAL, phi REAL,
  sigma2    REAL, loglik REAL, aicc REAL,
  fitted_ms INTEGER NOT NULL,
  reason    TEXT NOT NULL
);
CREATE TABLE state (
  series  INTEGER PRIMARY KEY REFERENCES series(id),
  step    INTEGER NOT NULL,
  time_ms INTEGER NOT NULL,
  encoded BLOB NOT NULL
);
CREATE TABLE flags (
  series   INTEGER NOT NULL REFERENCES series(id),
  step     INTEGER NOT NULL,
  time_ms  INTEGER NOT NULL,
  value    REAL, expected REAL, lower REAL, upper REAL,
  level    REAL, score REAL,
  form     TEXT NOT NULL,
  PRIMARY KEY (series, step)
) WITHOUT ROWID;
CREATE INDEX flags_by_time ON flags(time_ms);
CREATE TABLE alerts (
  series  INTEGER NOT NULL REFERENCES series(id),
  step    INTEGER NOT NULL,
  kind    TEXT NOT NULL CHECK (kind IN ('raised', 'cleared')),
  time_ms INTEGER NOT NULL,
  detail  TEXT NOT NULL,
  PRIMARY KEY (series, step, kind)
) WITHOUT ROWID;
CREATE INDEX alerts_by_time ON alerts(time_ms);
CREATE TABLE dead_letters (
  id          INTEGER PRIMARY KEY,
  received_ms INTEGER NOT NULL,
  stream      TEXT NOT NULL,
  partition   INTEGER NOT NULL,
  source_offset INTEGER NOT NULL,
  raw         BLOB NOT NULL,
  raw_size    INTEGER NOT NULL,
  reason      TEXT NOT NULL,
  status_code INTEGER NOT NULL
);
CREATE TABLE events (
  id      INTEGER PRIMARY KEY,
  time_ms INTEGER NOT NULL,
  series  INTEGER REFERENCES series(id),
  kind    TEXT NOT NULL,
  detail  TEXT NOT NULL
);
CREATE INDEX events_by_series ON events(series, id);
CREATE TABLE source_positions (
  stream      TEXT NOT NULL,
  partition   INTEGER NOT NULL,
  next_offset INTEGER NOT NULL,
  PRIMARY KEY (stream, partition)
) WITHOUT ROWID;
)sql"},
    {2, "per-series history: packed append log plus per-series chunks for refits",
     R"sql(
CREATE TABLE history_log (
  seq    INTEGER PRIMARY KEY,
  count  INTEGER NOT NULL,
  points BLOB NOT NULL
);
CREATE TABLE history (
  series     INTEGER NOT NULL REFERENCES series(id),
  first_step INTEGER NOT NULL,
  count      INTEGER NOT NULL,
  points     BLOB NOT NULL,
  PRIMARY KEY (series, first_step)
) WITHOUT ROWID;
)sql"},
    {3, "explicit refit requests: the refit verb adds rows, a running daemon takes them",
     R"sql(
CREATE TABLE refit_requests (
  id           INTEGER PRIMARY KEY,
  pattern      TEXT NOT NULL,
  reason       TEXT NOT NULL,
  requested_ms INTEGER NOT NULL
);
)sql"},
    {4, "history written once: series-grouped log rows (format 2), compaction appends rows instead of rewriting chunks",
     R"sql(
ALTER TABLE history_log ADD COLUMN format INTEGER NOT NULL DEFAULT 1;
CREATE TABLE history_rows (
  series   INTEGER NOT NULL REFERENCES series(id),
  seq      INTEGER NOT NULL,
  min_step INTEGER NOT NULL,
  max_step INTEGER NOT NULL,
  count    INTEGER NOT NULL,
  format   INTEGER NOT NULL,
  points   BLOB NOT NULL,
  PRIMARY KEY (series, seq)
) WITHOUT ROWID;
INSERT INTO history_rows(series, seq, min_step, max_step, count, format, points)
  SELECT series, row_number() OVER (ORDER BY series, first_step) - 1 - (SELECT count(*) FROM history),
         first_step, first_step + count - 1, count, 1, points
  FROM history;
DROP TABLE history;
ALTER TABLE history_rows RENAME TO history;
CREATE TABLE history_seq (next_seq INTEGER NOT NULL);
INSERT INTO history_seq VALUES (0);
)sql"},
    {5, "history rows keyed (series, max_step, seq): a history read finds the rows of its window by range",
     R"sql(
CREATE TABLE history_by_step (
  series   INTEGER NOT NULL REFERENCES series(id),
  max_step INTEGER NOT NULL,
  seq      INTEGER NOT NULL,
  min_step INTEGER NOT NULL,
  count    INTEGER NOT NULL,
  format   INTEGER NOT NULL,
  points   BLOB NOT NULL,
  PRIMARY KEY (series, max_step, seq)
) WITHOUT ROWID;
INSERT INTO history_by_step(series, max_step, seq, min_step, count, format, points)
  SELECT series, max_step, seq, min_step, count, format, points FROM history;
DROP TABLE history;
ALTER TABLE history_by_step RENAME TO history;
)sql"},
    {6, "history rows clustered by compaction generation: a compaction appends at the end of the table",
     R"sql(
CREATE TABLE history_generations (
  gen          INTEGER PRIMARY KEY,
  points       INTEGER NOT NULL,
  compacted_ms INTEGER NOT NULL
);
INSERT INTO history_generations(gen, points, compacted_ms)
  SELECT 0, total, 0 FROM (SELECT sum(count) AS total FROM history) WHERE total IS NOT NULL;
-- The columns of version 5's history, led by the generation.
CREATE TABLE history_by_generation (
  gen INTEGER NOT NULL, series INTEGER NOT NULL REFERENCES series(id), seq INTEGER NOT NULL,
  min_step INTEGER NOT NULL, max_step INTEGER NOT NULL, count INTEGER NOT NULL,
  format INTEGER NOT NULL, points BLOB NOT NULL,
  PRIMARY KEY (gen, series, seq)
) WITHOUT ROWID;
INSERT INTO history_by_generation(gen, series, seq, min_step, max_step, count, format, points)
  SELECT 0, series, seq, min_step, max_step, count, format, points FROM history ORDER BY series, seq;
DROP TABLE history;
ALTER TABLE history_by_generation RENAME TO history;
)sql"},
    {7, "history rows packed: one row holds many series' points of a generation, found through its directory",
     R"sql(
-- Rows of versions 2-6 hold one series each (first_series = last_series, no directory); a
-- compaction now writes format-3 rows holding many series. The key is a rowid (= seq) so one
-- series' part of a row is read with incremental blob I/O.
CREATE TABLE history_packed (
  seq          INTEGER PRIMARY KEY,
  gen          INTEGER NOT NULL,
  first_series INTEGER NOT NULL,
  last_series  INTEGER NOT NULL,
  min_step     INTEGER NOT NULL,
  max_step     INTEGER NOT NULL,
  count        INTEGER NOT NULL,
  format       INTEGER NOT NULL,
  directory    BLOB,
  points       BLOB NOT NULL
);
INSERT INTO history_packed(seq, gen, first_series, last_series, min_step, max_step, count, format, directory, points)
  SELECT seq, gen, series, series, min_step, max_step, count, format, NULL, points FROM history ORDER BY seq;
DROP TABLE history;
ALTER TABLE history_packed RENAME TO history;
CREATE INDEX history_by_series ON history(gen, last_series);
)sql"},
    {8, "flags appended in arrival order; (series, step) stays unique through a small index",
     R"sql(
-- Keyed by (series, step), each group commit's flags landed on as many table pages as flags (a
-- few MB of WAL per commit at 100k series); rows now append, and only the index's small entries
-- go in at random.
CREATE TABLE flags_by_arrival (
  id       INTEGER PRIMARY KEY,
  series   INTEGER NOT NULL REFERENCES series(id),
  step     INTEGER NOT NULL,
  time_ms  INTEGER NOT NULL,
  value    REAL, expected REAL, lower REAL, upper REAL,
  level    REAL, score REAL,
  form     TEXT NOT NULL
);
INSERT INTO flags_by_arrival(series, step, time_ms, value, expected, lower, upper, level, score, form)
  SELECT series, step, time_ms, value, expected, lower, upper, level, score, form FROM flags
  ORDER BY time_ms, series, step;
DROP TABLE flags;
ALTER TABLE flags_by_arrival RENAME TO flags;
CREATE UNIQUE INDEX flags_by_series ON flags(series, step);
CREATE INDEX flags_by_time ON flags(time_ms);
)sql"},
    {9, "flags clustered by (step, series): a commit's flags go in beside each other",
     R"sql(
-- Version 8's unique index on (series, step) took each commit's flags at as many places as series
-- flagged: at 100k series every group commit rewrote most of its pages (~0.1 s of the writer's
-- time per 3M records in plimsoll-bench engine), and more as flags accumulate. Steps advance
-- with time, so keyed by (step, series) a commit's flags land together at the high end, and the
-- key itself keeps a flag unique. A per-series read walks the steps down until it has enough.
CREATE TABLE flags_by_step (
  series   INTEGER NOT NULL REFERENCES series(id),
  step     INTEGER NOT NULL,
  time_ms  INTEGER NOT NULL,
  value    REAL, expected REAL, lower REAL, upper REAL,
  level    REAL, score REAL,
  form     TEXT NOT NULL,
  PRIMARY KEY (step, series)
) WITHOUT ROWID;
INSERT INTO flags_by_step(series, step, time_ms, value, expected, lower, upper, level, score, form)
  SELECT series, step, time_ms, value, expected, lower, upper, level, score, form FROM flags ORDER BY step, series;
DROP TABLE flags;
ALTER TABLE flags_by_step RENAME TO flags;
CREATE INDEX flags_by_time ON flags(time_ms);
)sql"},
};

Result<int64_t> UserVersion(SqliteDb& db) { return db.QueryInt("PRAGMA user_version"); }

Status CheckApplication(SqliteDb& db, int64_t version) {
  Result<int64_t> app = db.QueryInt("PRAGMA application_id");
  if (!app.ok()) return app.status();
  if (*app == kApplicationId) return Status::Ok();
  if (*app == 0 && version == 0) {
    // A fresh file, or someone else's SQLite database that never set an application id.
    Result<int64_t> objects = db.QueryInt("SELECT count(*) FROM sqlite_schema");
    if (!objects.ok()) return objects.status();
    if (*objects == 0) return Status::Ok();
  }
  return Status::Corruption("'" + db.path() + "' is an SQLite database but not a plimsoll store (application_id " +
                            std::to_string(*app) + ")");
}

}  // namespace

std::span<const Migration> Migrations() { return kMigrations; }

int LatestSchemaVersion() { return kMigrations[std::size(kMigrations) - 1].version; }

Status MigrateSchema(SqliteDb& db, int target_version) {
  Result<int64_t> version = UserVersion(db);
  if (!version.ok()) return version.status().WithContext("reading schema version of '" + db.path() + "'");
  PLIMSOLL_RETURN_IF_ERROR(CheckApplication(db, *version));
  if (*version > LatestSchemaVersion()) {
    return Status::Unavailable("store '" + db.path() + "' has schema version " + std::to_string(*version) +
                               ", newer than this build's " + std::to_string(LatestSchemaVersion()));
  }
  for (const Migration& step : kMigrations) {
    if (step.version <= *version || step.version > target_version) continue;
    PLIMSOLL_RETURN_IF_ERROR(db.Exec("BEGIN IMMEDIATE"));
    Status status = db.Exec(step.sql);
    if (status.ok()) status = db.Exec("PRAGMA application_id = " + std::to_string(kApplicationId));
    if (status.ok()) status = db.Exec("PRAGMA user_version = " + std::to_string(step.version));
    if (status.ok()) status = db.Exec("COMMIT");
    if (!status.ok()) {
      if (!db.autocommit()) IgnoreError(db.Exec("ROLLBACK"));  // the step's own error is the one to report
      return status.WithContext("migrating '" + db.path() + "' to schema version " + std::to_string(step.version));
    }
  }
  return Status::Ok();
}

Status CheckSchema(SqliteDb& db) {
  Result<int64_t> version = UserVersion(db);
  if (!version.ok()) return version.status().WithContext("reading schema version of '" + db.path() + "'");
  PLIMSOLL_RETURN_IF_ERROR(CheckApplication(db, *version));
  if (*version != LatestSchemaVersion()) {
    return Status::Unavailable("store '" + db.path() + "' has schema version " + std::to_string(*version) +
                               ", this build reads " + std::to_string(LatestSchemaVersion()) +
                               (*version < LatestSchemaVersion() ? "; open it once read-write to migrate it" : ""));
  }
  return Status::Ok();
}

}  // namespace plimsoll::store
