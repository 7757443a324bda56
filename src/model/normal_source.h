#pragma once
// Standard normal draws from std::mt19937_64 by Marsaglia's polar method. Written out rather
// than std::normal_distribution, whose algorithm differs between standard libraries, so a seed
// gives the same numbers wherever we build.

#include <cmath>
#include <cstdint>
#include <random>

namespace plimsoll::model::internal {

class NormalSource {
 public:
  explicit NormalSource(uint64_t seed) : gen_(seed) {}

  double Next() {
    if (has_spare_) {
      has_spare_ = false;
      return spare_;
    }
    double u, v, s;
    do {
      u = 2.0 * Uniform() - 1.0;
      v = 2.0 * Uniform() - 1.0;
      s = u * u + v * v;
    } while (s >= 1.0 || s == 0.0);
    const double f = std::sqrt(-2.0 * std::log(s) / s);
    spare_ = v * f;
    has_spare_ = true;
    return u * f;
  }

 private:
  double Uniform() { return static_cast<double>(gen_() >> 11) * 0x1.0p-53; }

  std::mt19937_64 gen_;
  double spare_ = 0.0;
  bool has_spare_ = false;
};

}  // namespace plimsoll::model::internal
