#include "model/state_space.h"

namespace plimsoll::model::internal {

StateSpace BuildStateSpace(const ModelSpec& spec, const Params& params) {
  const bool trend = spec.has_trend();
  const double phi = spec.damped() ? params.phi : 1.0;
  const int m = spec.has_season() ? spec.period : 0;
  const int o = trend ? 2 : 1;  // first seasonal index
  const int dim = o + m;
  StateSpace ss{Eigen::MatrixXd::Zero(dim, dim), Eigen::VectorXd::Zero(dim), Eigen::VectorXd::Zero(dim)};
  ss.F(0, 0) = 1.0;
  ss.w(0) = 1.0;
  ss.g(0) = params.alpha;
  if (trend) {
    ss.F(0, 1) = phi;
    ss.F(1, 1) = phi;
    ss.w(1) = phi;
    ss.g(1) = params.beta;
  }
  if (m > 0) {
    ss.F(o, o + m - 1) = 1.0;
    for (int k = 1; k < m; ++k) ss.F(o + k, o + k - 1) = 1.0;
    ss.w(o + m - 1) = 1.0;
    ss.g(o) = params.gamma;
  }
  return ss;
}

}  // namespace plimsoll::model::internal
