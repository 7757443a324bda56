// Replays the committed fuzz seed corpus (tests/stream/fuzz/corpus/) through the same entry
// points the libFuzzer targets use, so every CI run exercises them without clang.

#define PLIMSOLL_FUZZ_REPLAY 1
#include "stream/fuzz/config_fuzz.cc"
#include "stream/fuzz/decode_fuzz.cc"

#include <filesystem>
#include <fstream>
#include <iterator>
#include <string>

#include <catch2/catch.hpp>

namespace plimsoll::stream::fuzz {
namespace {

// Runs `one` on every file of the corpus directory; returns how many files it ran.
template <typename Fn>
int ReplayCorpus(const std::string& name, Fn one) {
  const std::filesystem::path dir = std::filesystem::path(PLIMSOLL_SOURCE_DIR) / "tests/stream/fuzz/corpus" / name;
  int files = 0;
  for (const auto& entry : std::filesystem::directory_iterator(dir)) {
    std::ifstream in(entry.path(), std::ios::binary);
    const std::string bytes((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
    INFO(entry.path().string());
    CHECK_NOTHROW(one(reinterpret_cast<const uint8_t*>(bytes.data()), bytes.size()));
    ++files;
  }
  return files;
}

}  // namespace

TEST_CASE("decode fuzz corpus replays without failures", "[stream][fuzz]") {
  CHECK(ReplayCorpus("decode", DecodeOne) >= 10);
}

TEST_CASE("config fuzz corpus replays without failures", "[stream][fuzz]") {
  CHECK(ReplayCorpus("config", ConfigOne) >= 5);
}

TEST_CASE("fuzz invariants fire on a broken guarantee", "[stream][fuzz]") {
  // The replay build turns a failed check into an exception; make sure the macro is live.
  CHECK_THROWS_AS([] { PLIMSOLL_FUZZ_CHECK(1 + 1 == 3); }(), std::logic_error);
}

}  // namespace plimsoll::stream::fuzz
