#pragma once
// Linear state-space matrices of a form (Hyndman, Koehler, Ord & Snyder 2008, ch. 3):
//   y_t = w' x_{t-1} + e_t,  x_t = F x_{t-1} + g e_t,
// for the linear analogue of the form (M trend read as A, Md as Ad, M season as A), state
// x = (l, b, s_t, s_{t-1}, ..., s_{t-m+1}): the trend entry only with a trend, the m seasonal
// entries only with a season (newest first; the last one is used by the next observation).

#include <Eigen/Dense>

#include "plimsoll/model/params.h"
#include "plimsoll/model/spec.h"

namespace plimsoll::model::internal {

struct StateSpace {
  Eigen::MatrixXd F;
  Eigen::VectorXd g;
  Eigen::VectorXd w;
};

StateSpace BuildStateSpace(const ModelSpec& spec, const Params& params);

}  // namespace plimsoll::model::internal
