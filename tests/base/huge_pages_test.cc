#include "plimsoll/base/huge_pages.h"

#include <cstdint>
#include <numeric>
#include <vector>

#include <catch2/catch.hpp>

namespace plimsoll {
namespace {

TEST_CASE("huge buffers start on a 2 MiB boundary and hold what is written", "[base]") {
  HugeBuffer buffer(3 * kHugePageThreshold + 123);
  REQUIRE(buffer.size() == 3 * kHugePageThreshold + 123);
  CHECK(reinterpret_cast<uintptr_t>(buffer.data()) % (size_t{2} << 20) == 0);
  for (size_t i = 0; i < buffer.size(); i += 4096) buffer.data()[i] = static_cast<char>(i / 4096);
  buffer.data()[buffer.size() - 1] = 'z';
  for (size_t i = 0; i < buffer.size(); i += 4096) REQUIRE(buffer.data()[i] == static_cast<char>(i / 4096));
  CHECK(buffer.data()[buffer.size() - 1] == 'z');
}

TEST_CASE("a vector on the huge page allocator grows across the threshold and keeps its elements", "[base]") {
  std::vector<int64_t, HugePageAllocator<int64_t>> values;
  const size_t n = 3 * kHugePageThreshold / sizeof(int64_t);  // passes from operator new to mapped blocks
  for (size_t i = 0; i < n; ++i) values.push_back(static_cast<int64_t>(i));
  CHECK(values.size() == n);
  CHECK(std::accumulate(values.begin(), values.end(), int64_t{0}) == static_cast<int64_t>(n * (n - 1) / 2));
  values.shrink_to_fit();
  values.resize(10);  // back below the threshold
  values.shrink_to_fit();
  CHECK(values.back() == 9);
}

}  // namespace
}  // namespace plimsoll
