#pragma once
// Params: smoothing parameters in the state-space convention (Hyndman, Koehler, Ord & Snyder
// 2008, ch. 2): beta = alpha * beta-star, gamma = (1 - alpha) * gamma-star. phi is the damping
// factor (1 for undamped forms). Parameters a form does not use are ignored and should be 0
// (beta, gamma) or 1 (phi).
//
// Thread-safety: value type.

#include "plimsoll/base/status.h"
#include "plimsoll/model/spec.h"

namespace plimsoll::model {

struct Params {
  double alpha = 0.5;
  double beta = 0.0;
  double gamma = 0.0;
  double phi = 1.0;
  friend bool operator==(const Params&, const Params&) = default;
};

enum class ParamRegion : uint8_t {
  // 0 < alpha < 1, 0 < beta < alpha, 0 < gamma < 1 - alpha, 0.8 <= phi <= 0.98 (phi range is
  // common practice).
  kUsual = 0,
  // Forecastability: eigenvalues of D = F - g w' inside the unit circle (2008 book, ch. 10).
  kAdmissible = 1,
};

// OK when `params` lies in `region` for `spec`; otherwise OutOfRange naming the parameter.
Status CheckParams(const ModelSpec& spec, const Params& params, ParamRegion region);

}  // namespace plimsoll::model
