#include "plimsoll/base/huge_pages.h"

#include <sys/mman.h>

#include <cstdint>

namespace plimsoll {
namespace {

constexpr size_t kHugePage = size_t{2} << 20;

size_t RoundUp(size_t bytes) { return (bytes + kHugePage - 1) / kHugePage * kHugePage; }

}  // namespace

void* MapHugeBuffer(size_t bytes) {
  // Map one huge page more than needed and trim both ends, so the buffer starts on a 2 MiB
  // boundary (older kernels do not align anonymous mappings for huge pages by themselves).
  const size_t length = RoundUp(bytes);
  void* raw = mmap(nullptr, length + kHugePage, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS, -1, 0);
  if (raw == MAP_FAILED) throw std::bad_alloc();
  const auto start = reinterpret_cast<uintptr_t>(raw);
  const uintptr_t aligned = (start + kHugePage - 1) / kHugePage * kHugePage;
  if (aligned > start) munmap(raw, aligned - start);
  const uintptr_t end = start + length + kHugePage;
  if (end > aligned + length) munmap(reinterpret_cast<void*>(aligned + length), end - (aligned + length));
  void* data = reinterpret_cast<void*>(aligned);
  madvise(data, length, MADV_HUGEPAGE);  // advice only: without THP the 4 KiB pages still work
  return data;
}

void UnmapHugeBuffer(void* data, size_t bytes) noexcept { munmap(data, RoundUp(bytes)); }

}  // namespace plimsoll
