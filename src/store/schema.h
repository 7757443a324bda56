#pragma once
// The store's schema as an ordered list of migrations. PRAGMA user_version holds the number of
// the last migration applied; each migration runs in its own transaction together with the
// user_version bump, so a crash mid-migration leaves the previous version intact.
// Never edit or reorder a released migration: append a new one.
//
// Thread-safety: free functions over a SqliteDb used by one thread.

#include <span>

#include "plimsoll/base/status.h"
#include "store/sqlite.h"

namespace plimsoll::store {

// Stored in PRAGMA application_id so a foreign SQLite file is refused ("PLMS").
inline constexpr int64_t kApplicationId = 0x504C4D53;

struct Migration {
  int version;              // user_version after this step
  const char* description;  // one line, for logs and docs
  const char* sql;          // DDL; may hold several statements
};

// All migrations in order; versions are 1, 2, ... with no holes.
std::span<const Migration> Migrations();

// The version a fully migrated store has.
int LatestSchemaVersion();

// Applies every migration after the file's current user_version, up to `target_version`.
// Fails with Corruption when the file belongs to another application, Unavailable when the file
// is newer than this build knows, or the SQLite status of the failing step (whose transaction is
// rolled back). REQUIRES: 0 <= target_version <= LatestSchemaVersion(); no open transaction.
Status MigrateSchema(SqliteDb& db, int target_version);

// Checks that a read-only connection sees a store at exactly LatestSchemaVersion().
Status CheckSchema(SqliteDb& db);

}  // namespace plimsoll::store
