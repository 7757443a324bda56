#pragma once
// ByteWriter / ByteReader: fixed-width little-endian encoding for blobs stored in SQLite and sent
// on the changelog topic. Doubles are copied bit for bit, so a round trip is exact.
// Thread-safety: value types, one per thread.

#include <bit>
#include <cstdint>
#include <cstring>
#include <string>
#include <string_view>
#include <utility>

namespace plimsoll {

static_assert(std::endian::native == std::endian::little, "blobs are little-endian; add byte swaps for this target");

class ByteWriter {
 public:
  template <typename T>
  void Put(T value) {
    static_assert(std::is_trivially_copyable_v<T>);
    char buf[sizeof(T)];
    std::memcpy(buf, &value, sizeof(T));
    out_.append(buf, sizeof(T));
  }
  // The length prefix of a field whose `size` bytes follow (PutBytes, or Put calls).
  void PutLength(size_t size) { Put<uint32_t>(static_cast<uint32_t>(size)); }
  void PutBytes(std::string_view bytes) {
    PutLength(bytes.size());
    out_.append(bytes);
  }
  // Encoders that know their size reserve once instead of growing the string field by field.
  void Reserve(size_t bytes) { out_.reserve(out_.size() + bytes); }
  std::string& str() { return out_; }
  std::string Take() { return std::move(out_); }

 private:
  std::string out_;
};

// Reads what ByteWriter wrote. Every getter returns false (and leaves `value` alone) when the
// input is too short, so decoders can report Corruption instead of reading past the end.
class ByteReader {
 public:
  explicit ByteReader(std::string_view in) : in_(in) {}
  template <typename T>
  [[nodiscard]] bool Get(T& value) {
    static_assert(std::is_trivially_copyable_v<T>);
    if (in_.size() < sizeof(T)) return false;
    std::memcpy(&value, in_.data(), sizeof(T));
    in_.remove_prefix(sizeof(T));
    return true;
  }
  [[nodiscard]] bool GetBytes(std::string_view& bytes) {
    uint32_t size = 0;
    if (!Get(size) || in_.size() < size) return false;
    bytes = in_.substr(0, size);
    in_.remove_prefix(size);
    return true;
  }
  size_t remaining() const { return in_.size(); }

 private:
  std::string_view in_;
};

}  // namespace plimsoll
