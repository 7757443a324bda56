#include "store/sqlite.h"

#include <cmath>
#include <string>

namespace plimsoll::store {

Status SqliteStatus(int rc, std::string_view context, sqlite3* db) {
  if (rc == SQLITE_OK || rc == SQLITE_ROW || rc == SQLITE_DONE) return Status::Ok();
  std::string msg(context);
  msg += ": ";
  // The connection's message is more specific ("UNIQUE constraint failed: ...") when it matches rc.
  if (db != nullptr && sqlite3_extended_errcode(db) == rc) {
    msg += sqlite3_errmsg(db);
  } else {
    msg += sqlite3_errstr(rc);
  }
  msg += " (sqlite code ";
  msg += std::to_string(rc);
  msg += ")";
  switch (rc & 0xff) {
    case SQLITE_BUSY:
    case SQLITE_LOCKED:
      return Status::Busy(std::move(msg));
    case SQLITE_FULL:
    case SQLITE_IOERR:
    case SQLITE_CANTOPEN:
    case SQLITE_PROTOCOL:
      return Status::IoError(std::move(msg));
    case SQLITE_READONLY:
    case SQLITE_PERM:
    case SQLITE_AUTH:
      return Status::Unavailable(std::move(msg));
    case SQLITE_CORRUPT:
    case SQLITE_NOTADB:
      return Status::Corruption(std::move(msg));
    case SQLITE_CONSTRAINT:
    case SQLITE_MISMATCH:
    case SQLITE_RANGE:
    case SQLITE_TOOBIG:
      return Status::InvalidArgument(std::move(msg));
    case SQLITE_INTERRUPT:
    case SQLITE_ABORT:
      return Status::Aborted(std::move(msg));
    default:
      return Status::Internal(std::move(msg));
  }
}

Statement::~Statement() {
  if (stmt_ != nullptr) {
    sqlite3_reset(stmt_);
    sqlite3_clear_bindings(stmt_);
  }
}

Statement& Statement::Bind(int index, int64_t value) {
  sqlite3_bind_int64(stmt_, index, value);
  return *this;
}

Statement& Statement::Bind(int index, double value) {
  if (std::isnan(value)) {
    sqlite3_bind_null(stmt_, index);
  } else {
    sqlite3_bind_double(stmt_, index, value);
  }
  return *this;
}

namespace {
sqlite3_destructor_type Destructor(Statement::Bytes bytes) {
  return bytes == Statement::Bytes::kCopy ? SQLITE_TRANSIENT : SQLITE_STATIC;
}
}  // namespace


// A zero-length text or blob must still be a value, not NULL: SQLite needs a non-null pointer.
const char kEmpty[1] = {0};

Statement& Statement::Bind(int index, std::string_view text, Bytes bytes) {
  sqlite3_bind_text(stmt_, index, text.empty() ? kEmpty : text.data(), static_cast<int>(text.size()),
                    Destructor(bytes));
  return *this;
}

Statement& Statement::BindBlob(int index, std::string_view data, Bytes bytes) {
  sqlite3_bind_blob(stmt_, index, data.empty() ? kEmpty : data.data(), static_cast<int>(data.size()),
                    Destructor(bytes));
  return *this;
}

Statement& Statement::BindNull(int index) {
  sqlite3_bind_null(stmt_, index);
  return *this;
}

Result<bool> Statement::Step() {
  int rc = sqlite3_step(stmt_);
  if (rc == SQLITE_ROW) return true;
  if (rc == SQLITE_DONE) return false;
  // The statement's first words identify it; the full text of a long upsert only buries the cause.
  std::string_view sql(sqlite3_sql(stmt_));
  std::string context(sql.substr(0, 48));
  if (sql.size() > 48) context += "...";
  Status status = SqliteStatus(rc, context, db_->raw());
  sqlite3_reset(stmt_);
  return status;
}

Status Statement::Run() {
  Result<bool> row = Step();
  while (row.ok() && *row) row = Step();
  sqlite3_reset(stmt_);
  return row.status();
}

void Statement::Reset() { sqlite3_reset(stmt_); }

std::string Statement::Text(int col) const {
  const unsigned char* text = sqlite3_column_text(stmt_, col);
  if (text == nullptr) return {};
  return std::string(reinterpret_cast<const char*>(text), static_cast<size_t>(sqlite3_column_bytes(stmt_, col)));
}

std::string Statement::Blob(int col) const { return std::string(BlobView(col)); }

std::string_view Statement::BlobView(int col) const {
  const void* data = sqlite3_column_blob(stmt_, col);
  if (data == nullptr) return {};
  return std::string_view(static_cast<const char*>(data), static_cast<size_t>(sqlite3_column_bytes(stmt_, col)));
}

namespace {

// Opens the blob, then calls read(blob, bytes, context) with its size and an error context.
template <typename Fn>
Status WithBlob(sqlite3* db, const char* table, const char* column, int64_t rowid, Fn read) {
  sqlite3_blob* raw = nullptr;
  const int rc = sqlite3_blob_open(db, "main", table, column, rowid, /*flags=read-only*/ 0, &raw);
  const std::unique_ptr<sqlite3_blob, int (*)(sqlite3_blob*)> blob(raw, sqlite3_blob_close);
  const std::string context = std::string("reading ") + table + "." + column + " of row " + std::to_string(rowid);
  if (rc != SQLITE_OK) return SqliteStatus(rc, context, db);
  return read(blob.get(), static_cast<int64_t>(sqlite3_blob_bytes(blob.get())), context);
}

}  // namespace

Status SqliteDb::ReadBlob(const char* table, const char* column, int64_t rowid, std::span<char> out) {
  return WithBlob(db_, table, column, rowid, [&](sqlite3_blob* blob, int64_t bytes, const std::string& context) {
    if (static_cast<size_t>(bytes) != out.size())
      return Status::InvalidArgument(context + ": the blob has " + std::to_string(bytes) + " bytes, not " +
                                     std::to_string(out.size()));
    if (out.empty()) return Status::Ok();
    return SqliteStatus(sqlite3_blob_read(blob, out.data(), static_cast<int>(out.size()), 0), context, db_);
  });
}

Status SqliteDb::ReadBlobPart(const char* table, const char* column, int64_t rowid, int64_t offset,
                              std::span<char> out) {
  return WithBlob(db_, table, column, rowid, [&](sqlite3_blob* blob, int64_t bytes, const std::string& context) {
    if (offset < 0 || offset > bytes || out.size() > static_cast<size_t>(bytes - offset))
      return Status::InvalidArgument(context + ": bytes " + std::to_string(offset) + ".." +
                                     std::to_string(offset + static_cast<int64_t>(out.size())) +
                                     " are not inside its " + std::to_string(bytes));
    if (out.empty()) return Status::Ok();
    return SqliteStatus(sqlite3_blob_read(blob, out.data(), static_cast<int>(out.size()), static_cast<int>(offset)),
                        context, db_);
  });
}

Result<std::unique_ptr<SqliteDb>> SqliteDb::Open(const std::string& path, int flags) {
  sqlite3* raw = nullptr;
  int rc = sqlite3_open_v2(path.c_str(), &raw, flags | SQLITE_OPEN_NOMUTEX, nullptr);
  if (rc != SQLITE_OK) {
    Status status = SqliteStatus(rc, "opening store '" + path + "'", raw);
    sqlite3_close(raw);  // a handle is returned even on failure; NULL is a no-op
    return status;
  }
  sqlite3_extended_result_codes(raw, 1);
  return std::unique_ptr<SqliteDb>(new SqliteDb(raw, path));
}

SqliteDb::~SqliteDb() {
  cache_.clear();
  sqlite3_close(db_);
}

Result<Statement> SqliteDb::Prepare(std::string_view sql) {
  auto it = cache_.find(std::string(sql));
  if (it == cache_.end()) {
    sqlite3_stmt* stmt = nullptr;
    int rc = sqlite3_prepare_v3(db_, sql.data(), static_cast<int>(sql.size()), SQLITE_PREPARE_PERSISTENT, &stmt,
                                nullptr);
    if (rc != SQLITE_OK) return SqliteStatus(rc, "preparing '" + std::string(sql) + "'", db_);
    it = cache_.emplace(std::string(sql), std::unique_ptr<sqlite3_stmt, StmtDeleter>(stmt)).first;
  }
  return Statement(this, it->second.get());
}

Status SqliteDb::Exec(std::string_view sql) {
  std::string text(sql);
  int rc = sqlite3_exec(db_, text.c_str(), nullptr, nullptr, nullptr);
  return SqliteStatus(rc, text, db_);
}

Result<int64_t> SqliteDb::QueryInt(std::string_view sql) {
  Result<Statement> stmt = Prepare(sql);
  if (!stmt.ok()) return stmt.status();
  Result<bool> row = stmt->Step();
  if (!row.ok()) return row.status();
  if (!*row) return Status::NotFound("no row from '" + std::string(sql) + "'");
  return stmt->Int(0);
}

}  // namespace plimsoll::store
