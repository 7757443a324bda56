// Series simulation from the published state space equations.
#include "plimsoll/model/simulate.h"

#include <cmath>

#include "model/normal_source.h"
#include "model/update_kernels.h"

namespace plimsoll::model {

std::vector<double> SimulateSeries(const ModelSpec& spec, const Params& params, const State& initial, double sigma2,
                                   int n, uint64_t seed) {
  std::vector<double> out(static_cast<size_t>(n > 0 ? n : 0));
  internal::NormalSource normal(seed);
  const double sigma = std::sqrt(sigma2 > 0.0 ? sigma2 : 0.0);
  State st = initial;
  internal::DispatchForm(spec, [&]<typename K>(K) {
    for (double& y : out) y = K::Simulate(params, st, sigma * normal.Next());
  });
  return out;
}

std::vector<double> SimulateWithErrors(const ModelSpec& spec, const Params& params, const State& initial,
                                       std::span<const double> innovations) {
  std::vector<double> out(innovations.size());
  State st = initial;
  internal::DispatchForm(spec, [&]<typename K>(K) {
    for (size_t i = 0; i < innovations.size(); ++i) out[i] = K::Simulate(params, st, innovations[i]);
  });
  return out;
}

}  // namespace plimsoll::model
