#pragma once
// Thin RAII layer over the SQLite C API, internal to the store module.
//
// SqliteDb owns one sqlite3* connection and a cache of prepared statements keyed by SQL text;
// Statement is a non-owning, reset-on-scope-exit view of a cached sqlite3_stmt*. Every SQLite
// result code becomes a plimsoll::Status in exactly one place: SqliteStatus().
//
// Thread-safety: a SqliteDb (and its statements) is used by one thread at a time.

#include <sqlite3.h>

#include <cstdint>
#include <memory>
#include <span>
#include <string>
#include <string_view>
#include <unordered_map>

#include "plimsoll/base/status.h"

namespace plimsoll::store {

// Converts an SQLite primary or extended result code to a Status. OK for SQLITE_OK/ROW/DONE.
// BUSY/LOCKED -> Busy; FULL/IOERR/CANTOPEN -> IoError; READONLY/PERM/AUTH -> Unavailable;
// CORRUPT/NOTADB -> Corruption; CONSTRAINT/MISMATCH/RANGE/TOOBIG -> InvalidArgument;
// INTERRUPT/ABORT -> Aborted; anything else -> Internal. The message reads
// "<context>: <sqlite error text> (<code name>)", plus `db`'s message when one is given.
Status SqliteStatus(int rc, std::string_view context, sqlite3* db = nullptr);

class SqliteDb;

// A prepared statement borrowed from SqliteDb's cache. Resets and clears its bindings when it
// goes out of scope, so the next user starts clean. Bind indices are 1-based as in SQLite.
// REQUIRES: does not outlive the SqliteDb that made it. Move-only.
class Statement {
 public:
  Statement(SqliteDb* db, sqlite3_stmt* stmt) : db_(db), stmt_(stmt) {}
  Statement(Statement&& other) noexcept : db_(other.db_), stmt_(other.stmt_) { other.stmt_ = nullptr; }
  Statement(const Statement&) = delete;
  Statement& operator=(const Statement&) = delete;
  Statement& operator=(Statement&&) = delete;
  ~Statement();

  Statement& Bind(int index, int64_t value);
  Statement& Bind(int index, double value);  // NaN binds as NULL (SQLite's own behaviour)
  // kCopy: SQLite copies the bytes. kBorrow: no copy; REQUIRES the bytes stay valid until the
  // statement is reset or rebound (the hot commit path binds straight from the caller's batch).
  enum class Bytes { kCopy, kBorrow };
  Statement& Bind(int index, std::string_view text, Bytes bytes = Bytes::kCopy);
  Statement& BindBlob(int index, std::string_view data, Bytes bytes = Bytes::kCopy);
  Statement& BindNull(int index);

  // Runs one step. Returns true when a row is available, false when done; Status on failure.
  Result<bool> Step();
  // Steps to completion, discarding rows. Resets afterwards so the statement can be rebound.
  Status Run();
  // Resets for re-execution with new bindings (bindings are kept until rebound).
  void Reset();

  int64_t Int(int col) const { return sqlite3_column_int64(stmt_, col); }
  double Real(int col) const { return sqlite3_column_double(stmt_, col); }
  bool IsNull(int col) const { return sqlite3_column_type(stmt_, col) == SQLITE_NULL; }
  std::string Text(int col) const;
  std::string Blob(int col) const;  // bytes exactly as stored
  std::string_view BlobView(int col) const;  // valid until the next Step/Reset

  sqlite3_stmt* raw() const { return stmt_; }

 private:
  SqliteDb* db_;
  sqlite3_stmt* stmt_;
};

// One SQLite connection. Closes on destruction (finalising every cached statement first).
// Thread-safety: one thread at a time.
class SqliteDb {
 public:
  // Opens `path` with `flags` (SQLITE_OPEN_*). Fails with the converted SQLite status.
  static Result<std::unique_ptr<SqliteDb>> Open(const std::string& path, int flags);

  SqliteDb(const SqliteDb&) = delete;
  SqliteDb& operator=(const SqliteDb&) = delete;
  ~SqliteDb();

  // Returns the cached statement for `sql`, preparing it on first use. `sql` must be one statement.
  Result<Statement> Prepare(std::string_view sql);
  // Executes one or more statements with no bindings and no rows of interest (DDL, PRAGMA, BEGIN).
  Status Exec(std::string_view sql);
  // Runs a single-value query such as "PRAGMA user_version". NotFound when it returns no row.
  Result<int64_t> QueryInt(std::string_view sql);

  // Copies the blob in `column` of the row `rowid` of `table` into `out`, which must be exactly
  // the blob's size (InvalidArgument otherwise), without SQLite assembling the value in memory
  // of its own first (incremental blob I/O): for multi-megabyte history log rows.
  Status ReadBlob(const char* table, const char* column, int64_t rowid, std::span<char> out);
  // Copies out.size() bytes of that blob from byte `offset` (InvalidArgument when they are not all
  // inside it): one series' segment of a packed history row without reading the rest.
  Status ReadBlobPart(const char* table, const char* column, int64_t rowid, int64_t offset, std::span<char> out);

  // True while no explicit transaction is open.
  bool autocommit() const { return sqlite3_get_autocommit(db_) != 0; }
  int64_t changes() const { return sqlite3_changes64(db_); }
  sqlite3* raw() const { return db_; }
  const std::string& path() const { return path_; }

 private:
  SqliteDb(sqlite3* db, std::string path) : db_(db), path_(std::move(path)) {}
  struct StmtDeleter {
    void operator()(sqlite3_stmt* s) const { sqlite3_finalize(s); }
  };
  sqlite3* db_;
  std::string path_;
  // The destructor clears this before closing db_, so every statement is finalised first.
  std::unordered_map<std::string, std::unique_ptr<sqlite3_stmt, StmtDeleter>> cache_;
};

}  // namespace plimsoll::store
