#include "store/store_test_util.h"

#include <unistd.h>

#include <catch2/catch.hpp>
#include <random>

namespace plimsoll::store::testing {

TempDir::TempDir() {
  std::string pattern = (std::filesystem::temp_directory_path() / "plimsoll-store-XXXXXX").string();
  char* made = mkdtemp(pattern.data());
  if (made == nullptr) throw std::runtime_error("mkdtemp failed for " + pattern);
  path_ = made;
}

TempDir::~TempDir() {
  std::error_code ignored;
  std::filesystem::remove_all(path_, ignored);
}

std::string StateBytes(int64_t series, int64_t step, size_t size) {
  std::mt19937_64 rng(static_cast<uint64_t>(series) * 1'000'003u + static_cast<uint64_t>(step));
  std::string out(size, '\0');
  for (size_t i = 0; i < size; ++i) out[i] = static_cast<char>((rng() + i) & 0xff);
  return out;
}

std::string SeriesName(int64_t index) { return "s" + std::to_string(index); }

StoreOptions TestOptions(const TempDir& dir, const std::string& file) {
  StoreOptions options;
  options.path = dir.File(file);
  options.busy_timeout_ms = 20;
  options.busy_retries = 2;
  options.backoff_initial_ms = 1;
  options.backoff_max_ms = 5;
  return options;
}

std::unique_ptr<Store> OpenOrDie(const StoreOptions& options) {
  Result<std::unique_ptr<Store>> store = Store::Open(options);
  INFO(store.status().ToString());
  REQUIRE(store.ok());
  return std::move(store.value());
}

}  // namespace plimsoll::store::testing
