// State construction and its versioned binary encoding.
//
// Layout (version 1, all little-endian):
//   bytes 0-3  magic "PLST"     byte 4   version (1)
//   bytes 5-8  uint32 m (0 without season)    bytes 9-12  uint32 head
//   bytes 13-20 int64 steps
//   then IEEE-754 doubles: level, trend, sigma2, season[0..m-1] (ring order, not chronological)
#include "plimsoll/model/state.h"

#include <bit>
#include <cstring>

namespace plimsoll::model {
namespace {

constexpr char kMagic[4] = {'P', 'L', 'S', 'T'};
constexpr uint8_t kVersion = 1;
constexpr size_t kHeaderBytes = 4 + 1 + 4 + 4 + 8;
constexpr size_t kFixedDoubles = 3;
// A seasonal ring longer than this is not a state we wrote (one observation per second for
// a week is 604800).
constexpr uint32_t kMaxPeriod = 1u << 22;

// Little-endian field writers over a buffer sized beforehand.
char* PutU64(char* at, uint64_t v) {
  for (int i = 0; i < 8; ++i) at[i] = static_cast<char>((v >> (8 * i)) & 0xff);
  return at + 8;
}
char* PutU32(char* at, uint32_t v) {
  for (int i = 0; i < 4; ++i) at[i] = static_cast<char>((v >> (8 * i)) & 0xff);
  return at + 4;
}
uint64_t GetU64(const char* p) {
  uint64_t v = 0;
  for (int i = 0; i < 8; ++i) v |= static_cast<uint64_t>(static_cast<unsigned char>(p[i])) << (8 * i);
  return v;
}
uint32_t GetU32(const char* p) {
  uint32_t v = 0;
  for (int i = 0; i < 4; ++i) v |= static_cast<uint32_t>(static_cast<unsigned char>(p[i])) << (8 * i);
  return v;
}

}  // namespace

State MakeState(double level, double trend, std::span<const double> seasonal_chrono, double sigma2) {
  State st;
  st.level = level;
  st.trend = trend;
  st.season.assign(seasonal_chrono.begin(), seasonal_chrono.end());
  st.head = 0;
  st.sigma2 = sigma2;
  return st;
}

std::vector<double> SeasonChronological(const State& state) {
  const size_t m = state.season.size();
  std::vector<double> out(m);
  for (size_t k = 0; k < m; ++k) out[k] = state.season[(state.head + k) % m];
  return out;
}

size_t EncodedStateBytes(const State& state) { return kHeaderBytes + 8 * (kFixedDoubles + state.season.size()); }

void AppendState(const State& state, std::string& out) {
  const size_t start = out.size();
  // Sized once and filled in place: a checkpoint of every series encodes 100k of these at once.
  out.resize(start + EncodedStateBytes(state));
  char* at = out.data() + start;
  std::memcpy(at, kMagic, 4);
  at[4] = static_cast<char>(kVersion);
  at = PutU32(at + 5, static_cast<uint32_t>(state.season.size()));
  at = PutU32(at, state.head);
  at = PutU64(at, static_cast<uint64_t>(state.steps));
  at = PutU64(at, std::bit_cast<uint64_t>(state.level));
  at = PutU64(at, std::bit_cast<uint64_t>(state.trend));
  at = PutU64(at, std::bit_cast<uint64_t>(state.sigma2));
  for (double s : state.season) at = PutU64(at, std::bit_cast<uint64_t>(s));
}

std::string EncodeState(const State& state) {
  std::string out;
  AppendState(state, out);
  return out;
}

Result<State> DecodeState(std::string_view bytes) {
  if (bytes.size() < kHeaderBytes + 8 * kFixedDoubles) {
    return Status::Corruption("state blob is " + std::to_string(bytes.size()) + " bytes, shorter than the " +
                              std::to_string(kHeaderBytes + 8 * kFixedDoubles) + "-byte minimum");
  }
  const char* p = bytes.data();
  if (std::memcmp(p, kMagic, 4) != 0) return Status::Corruption("state blob does not start with PLST");
  const uint8_t version = static_cast<uint8_t>(p[4]);
  if (version != kVersion) {
    return Status::Corruption("state blob version " + std::to_string(version) + " is not supported (expected 1)");
  }
  const uint32_t m = GetU32(p + 5);
  const uint32_t head = GetU32(p + 9);
  if (m > kMaxPeriod) return Status::Corruption("state blob season length " + std::to_string(m) + " is implausible");
  const size_t expected = kHeaderBytes + 8 * (kFixedDoubles + m);
  if (bytes.size() != expected) {
    return Status::Corruption("state blob is " + std::to_string(bytes.size()) + " bytes; season length " +
                              std::to_string(m) + " needs " + std::to_string(expected));
  }
  if ((m == 0 && head != 0) || (m > 0 && head >= m)) {
    return Status::Corruption("state blob ring head " + std::to_string(head) + " is outside season length " +
                              std::to_string(m));
  }
  State st;
  st.head = head;
  st.steps = static_cast<int64_t>(GetU64(p + 13));
  const char* d = p + kHeaderBytes;
  st.level = std::bit_cast<double>(GetU64(d));
  st.trend = std::bit_cast<double>(GetU64(d + 8));
  st.sigma2 = std::bit_cast<double>(GetU64(d + 16));
  st.season.resize(m);
  for (uint32_t k = 0; k < m; ++k) st.season[k] = std::bit_cast<double>(GetU64(d + 24 + 8 * k));
  return st;
}

}  // namespace plimsoll::model
