// Update, SelectUpdate and point forecasts for every form.
#include "plimsoll/model/update.h"

#include <cmath>

#include "model/update_kernels.h"

namespace plimsoll::model {

UpdateFn SelectUpdate(const ModelSpec& spec) {
  return internal::DispatchForm(spec, []<typename K>(K) -> UpdateFn { return &K::Step; });
}

BandedUpdateFn SelectBandedUpdate(const ModelSpec& spec) {
  return internal::DispatchForm(spec, []<typename K>(K) -> BandedUpdateFn { return &K::StepBanded; });
}

StepResult Update(const ModelSpec& spec, const Params& params, State& state, double y) {
  return SelectUpdate(spec)(params, state, y);
}

double PointForecast(const ModelSpec& spec, const Params& params, const State& state, int h) {
  const double l = state.level;
  const double b = state.trend;
  double lp = l;
  switch (spec.trend) {
    case TrendType::kNone: break;
    case TrendType::kAdditive: lp = l + h * b; break;
    case TrendType::kAdditiveDamped: {
      double phi_h = 0.0, pw = 1.0;
      for (int i = 0; i < h; ++i) phi_h += (pw *= params.phi);
      lp = l + phi_h * b;
      break;
    }
    case TrendType::kMultiplicative: lp = l * std::pow(b, h); break;
    case TrendType::kMultiplicativeDamped: {
      double phi_h = 0.0, pw = 1.0;
      for (int i = 0; i < h; ++i) phi_h += (pw *= params.phi);
      lp = l * std::pow(b, phi_h);
      break;
    }
  }
  switch (spec.season) {
    case SeasonType::kNone: return lp;
    case SeasonType::kAdditive: return lp + state.SeasonAhead(h);
    case SeasonType::kMultiplicative: return lp * state.SeasonAhead(h);
  }
  return lp;
}

}  // namespace plimsoll::model
