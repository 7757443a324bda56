#pragma once
// Helpers shared by the store tests: a temporary directory removed at scope exit, and batch
// builders that make deterministic, recognisable rows.

#include <cstdint>
#include <filesystem>
#include <string>

#include "plimsoll/store/records.h"
#include "plimsoll/store/store.h"

namespace plimsoll::store::testing {

// A fresh directory under the system temp dir; removed (recursively) on destruction.
class TempDir {
 public:
  TempDir();
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;
  ~TempDir();
  const std::filesystem::path& path() const { return path_; }
  std::string File(const std::string& name) const { return (path_ / name).string(); }

 private:
  std::filesystem::path path_;
};

// Deterministic opaque state bytes for (series index, step): `size` bytes, all 256 byte values
// appear, so a lossy text round trip would be caught.
std::string StateBytes(int64_t series, int64_t step, size_t size = 256);

// "s<index>", the series names the tests use.
std::string SeriesName(int64_t index);

// Options for a store file in `dir` with short busy waits so tests stay quick.
StoreOptions TestOptions(const TempDir& dir, const std::string& file = "store.db");

// Opens or fails the test with the status text.
std::unique_ptr<Store> OpenOrDie(const StoreOptions& options);

}  // namespace plimsoll::store::testing
