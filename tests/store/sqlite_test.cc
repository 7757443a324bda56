#include "store/sqlite.h"

#include <catch2/catch.hpp>

#include "store/store_test_util.h"

namespace plimsoll::store {
namespace {

TEST_CASE("sqlite result codes map to plimsoll status codes", "[store]") {
  struct Case {
    int rc;
    StatusCode code;
  };
  const Case cases[] = {
      {SQLITE_BUSY, StatusCode::kBusy},           {SQLITE_BUSY_SNAPSHOT, StatusCode::kBusy},
      {SQLITE_LOCKED, StatusCode::kBusy},         {SQLITE_FULL, StatusCode::kIoError},
      {SQLITE_IOERR, StatusCode::kIoError},       {SQLITE_IOERR_FSYNC, StatusCode::kIoError},
      {SQLITE_READONLY, StatusCode::kUnavailable}, {SQLITE_CORRUPT, StatusCode::kCorruption},
      {SQLITE_NOTADB, StatusCode::kCorruption},   {SQLITE_CONSTRAINT_UNIQUE, StatusCode::kInvalidArgument},
      {SQLITE_INTERRUPT, StatusCode::kAborted},   {SQLITE_MISUSE, StatusCode::kInternal},
  };
  for (const Case& c : cases) {
    Status status = SqliteStatus(c.rc, "ctx");
    INFO(c.rc << " -> " << status.ToString());
    CHECK(status.code() == c.code);
    CHECK(status.message().rfind("ctx: ", 0) == 0);
  }
  CHECK(SqliteStatus(SQLITE_OK, "ctx").ok());
  CHECK(SqliteStatus(SQLITE_DONE, "ctx").ok());
  CHECK(SqliteStatus(SQLITE_ROW, "ctx").ok());
}

TEST_CASE("prepared statements are cached and reset between uses", "[store]") {
  testing::TempDir dir;
  Result<std::unique_ptr<SqliteDb>> db = SqliteDb::Open(dir.File("x.db"), SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE);
  REQUIRE(db.ok());
  REQUIRE((*db)->Exec("CREATE TABLE t(a INTEGER, b BLOB)").ok());
  sqlite3_stmt* first = nullptr;
  for (int64_t i = 0; i < 3; ++i) {
    Result<Statement> insert = (*db)->Prepare("INSERT INTO t(a, b) VALUES (?1, ?2)");
    REQUIRE(insert.ok());
    if (first == nullptr) first = insert->raw();
    CHECK(insert->raw() == first);  // same handle every time: prepared once
    insert->Bind(1, i).BindBlob(2, std::string("\0\x01\xff", 3));
    REQUIRE(insert->Run().ok());
  }
  Result<int64_t> count = (*db)->QueryInt("SELECT count(*) FROM t WHERE length(b) = 3");
  REQUIRE(count.ok());
  CHECK(*count == 3);
  // A statement abandoned mid-iteration is reset by its scope, so it starts again from row one.
  for (int round = 0; round < 2; ++round) {
    Result<Statement> select = (*db)->Prepare("SELECT a FROM t ORDER BY a");
    REQUIRE(select.ok());
    Result<bool> row = select->Step();
    REQUIRE(row.ok());
    REQUIRE(*row);
    CHECK(select->Int(0) == 0);
  }
}

TEST_CASE("a bad statement reports the sql and the sqlite message", "[store]") {
  testing::TempDir dir;
  Result<std::unique_ptr<SqliteDb>> db = SqliteDb::Open(dir.File("x.db"), SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE);
  REQUIRE(db.ok());
  Result<Statement> bad = (*db)->Prepare("SELECT nope FROM missing_table");
  REQUIRE_FALSE(bad.ok());
  CHECK(bad.status().message().find("missing_table") != std::string::npos);
}

TEST_CASE("opening a missing directory fails with an io error naming the path", "[store]") {
  testing::TempDir dir;
  std::string path = dir.File("no/such/dir/x.db");
  Result<std::unique_ptr<SqliteDb>> db = SqliteDb::Open(path, SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE);
  REQUIRE_FALSE(db.ok());
  CHECK(db.status().code() == StatusCode::kIoError);
  CHECK(db.status().message().find(path) != std::string::npos);
}

}  // namespace
}  // namespace plimsoll::store
