#pragma once
// Memory for multi-megabyte scratch buffers, backed by transparent huge pages where the kernel
// allows it (madvise mode). A fresh 30 MB malloc is mapped 4 KiB at a time on first touch: on the
// project's 2-core VM those ~7,000 page faults took about a third of a history compaction
// (DEVELOPERS.md, "Store figures"); with 2 MiB pages they are ~15.
//
// Thread-safety: free functions and a stateless allocator; safe from any thread.

#include <cstddef>
#include <cstdint>
#include <memory>
#include <new>

namespace plimsoll {

// Requests at least this large are mapped with huge pages; smaller ones use operator new.
inline constexpr size_t kHugePageThreshold = size_t{1} << 20;

// Maps `bytes` (>= kHugePageThreshold) of zeroed memory aligned to 2 MiB and advises huge pages
// (ignored where unsupported). Throws std::bad_alloc when the mapping fails.
void* MapHugeBuffer(size_t bytes);
// Unmaps a buffer from MapHugeBuffer; `bytes` is the size it was mapped with.
void UnmapHugeBuffer(void* data, size_t bytes) noexcept;

// A std allocator that maps large blocks with MapHugeBuffer. For vectors that grow to megabytes
// and are freed again (per-compaction scratch), not for long-lived small objects.
template <typename T>
struct HugePageAllocator {
  using value_type = T;
  HugePageAllocator() = default;
  template <typename U>
  HugePageAllocator(const HugePageAllocator<U>&) noexcept {}  // NOLINT: rebinding must be implicit

  T* allocate(size_t n) {
    if (n > SIZE_MAX / sizeof(T)) throw std::bad_array_new_length();
    const size_t bytes = n * sizeof(T);
    if (bytes >= kHugePageThreshold) return static_cast<T*>(MapHugeBuffer(bytes));
    return std::allocator<T>().allocate(n);
  }
  void deallocate(T* p, size_t n) noexcept {
    if (n * sizeof(T) >= kHugePageThreshold) {
      UnmapHugeBuffer(p, n * sizeof(T));
    } else {
      std::allocator<T>().deallocate(p, n);
    }
  }
  friend bool operator==(const HugePageAllocator&, const HugePageAllocator&) { return true; }
};

// A fixed-size byte buffer from HugePageAllocator, left uninitialised (a mapped one is zeroed by
// the kernel). Move-only.
class HugeBuffer {
 public:
  explicit HugeBuffer(size_t bytes) : data_(HugePageAllocator<char>().allocate(bytes)), size_(bytes) {}
  HugeBuffer(HugeBuffer&& other) noexcept : data_(other.data_), size_(other.size_) { other.data_ = nullptr; }
  HugeBuffer(const HugeBuffer&) = delete;
  HugeBuffer& operator=(const HugeBuffer&) = delete;
  HugeBuffer& operator=(HugeBuffer&&) = delete;
  ~HugeBuffer() {
    if (data_ != nullptr) HugePageAllocator<char>().deallocate(data_, size_);
  }
  char* data() { return data_; }
  size_t size() const { return size_; }

 private:
  char* data_;
  size_t size_;
};

}  // namespace plimsoll
