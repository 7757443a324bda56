#include "plimsoll/fit/initial.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <string>
#include <vector>

namespace plimsoll::fit {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
// Non-seasonal forms fit their starting line through this many observations (2002 IJF paper).
constexpr int kLineWindow = 10;

// Centred moving average at t over y[0, len): 2 x m for even m, m-term for odd m. NaN when the
// window leaves the range or contains a missing value.
double CentredAverage(std::span<const double> y, size_t len, int m, size_t t) {
  const size_t half = static_cast<size_t>(m / 2);
  if (t < half || t + half >= len) return kNaN;
  double sum = 0.0;
  if (m % 2 == 0) {
    sum = 0.5 * (y[t - half] + y[t + half]);
    for (size_t j = t - half + 1; j < t + half; ++j) sum += y[j];
  } else {
    for (size_t j = t - half; j <= t + half; ++j) sum += y[j];
  }
  return sum / m;  // NaN propagates from any missing value
}

struct Line {
  double intercept;  // value at t = 0 (one step before y[0])
  double slope;
  int points;
};

// Least-squares line through (t + 1, x[t]) for finite x[t]; slope 0 with one point.
Line FitLine(std::span<const double> x) {
  double st = 0, sx = 0, stt = 0, stx = 0;
  int count = 0;
  for (size_t t = 0; t < x.size(); ++t) {
    if (!std::isfinite(x[t])) continue;
    const double tt = static_cast<double>(t + 1);
    st += tt;
    sx += x[t];
    stt += tt * tt;
    stx += tt * x[t];
    ++count;
  }
  if (count == 0) return {kNaN, 0.0, 0};
  const double denom = count * stt - st * st;
  if (count < 2 || denom <= 0) return {sx / count, 0.0, count};
  const double slope = (count * stx - st * sx) / denom;
  return {(sx - slope * st) / count, slope, count};
}

}  // namespace

Result<model::State> HeuristicState(const model::ModelSpec& spec, std::span<const double> y) {
  const bool positive = spec.needs_positive_data();
  const int m = spec.period;
  std::vector<double> season;  // chronological: season[j] applies to y[j]
  size_t window = std::min<size_t>(y.size(), kLineWindow);

  if (spec.has_season()) {
    const bool mult = spec.season == model::SeasonType::kMultiplicative;
    if (m < 2) return Status::InvalidArgument("a seasonal form needs a period of at least 2");
    const size_t full = y.size() / static_cast<size_t>(m);
    if (full < static_cast<size_t>(kMinSeasonalPeriods)) {
      return Status::InvalidArgument("seasonal form " + spec.Notation() + " needs at least " +
                                     std::to_string(kMinSeasonalPeriods) + " full periods (" +
                                     std::to_string(kMinSeasonalPeriods * m) + " observations); history has " +
                                     std::to_string(y.size()));
    }
    // Three periods normally; more when missing values leave a position of the season without
    // any detrended value.
    std::vector<double> sum(static_cast<size_t>(m));
    std::vector<int> count(static_cast<size_t>(m));
    for (size_t periods = std::min<size_t>(full, 3); periods <= full; ++periods) {
      window = periods * static_cast<size_t>(m);
      std::fill(sum.begin(), sum.end(), 0.0);
      std::fill(count.begin(), count.end(), 0);
      for (size_t t = 0; t < window; ++t) {
        const double ma = CentredAverage(y, window, m, t);
        if (!std::isfinite(ma) || !std::isfinite(y[t])) continue;
        if (mult && ma <= 0) continue;
        sum[t % m] += mult ? y[t] / ma : y[t] - ma;
        ++count[t % m];
      }
      if (std::find(count.begin(), count.end(), 0) == count.end()) break;
    }
    season.resize(static_cast<size_t>(m));
    double total = 0.0;
    for (size_t j = 0; j < season.size(); ++j) {
      // A position with no usable value (missing data) starts neutral.
      season[j] = count[j] > 0 ? sum[j] / count[j] : (mult ? 1.0 : 0.0);
      total += season[j];
    }
    const double mean = total / m;
    for (double& s : season) {
      if (mult) {
        s = mean > 0 ? s / mean : 1.0;
        if (!(s > 0)) s = 1e-3;  // keeps the ring usable; likelihood decides from here
      } else {
        s -= mean;
      }
    }
  }

  // Seasonally adjusted values over the window.
  std::vector<double> adjusted(window);
  for (size_t t = 0; t < window; ++t) {
    double v = y[t];
    if (std::isfinite(v) && positive && v <= 0) {
      return Status::InvalidArgument("form " + spec.Notation() + " needs strictly positive data; observation " +
                                     std::to_string(t) + " is " + std::to_string(v));
    }
    if (!season.empty()) {
      v = spec.season == model::SeasonType::kMultiplicative ? v / season[t % m] : v - season[t % m];
    }
    adjusted[t] = v;
  }
  const Line line = FitLine(adjusted);
  if (line.points < (spec.has_trend() ? 2 : 1)) {
    return Status::InvalidArgument("too few observations among the first " + std::to_string(window) +
                                   " to start form " + spec.Notation());
  }

  double level = line.intercept;
  double trend = 0.0;
  if (!spec.has_trend()) {
    double s = 0.0;
    int c = 0;
    for (double v : adjusted) {
      if (std::isfinite(v)) s += v, ++c;
    }
    level = s / c;
  } else if (spec.multiplicative_trend()) {
    // Growth ratio from the line; a line through non-positive territory falls back to flat.
    trend = line.intercept > 0 ? std::clamp(1.0 + line.slope / line.intercept, 0.5, 2.0) : 1.0;
  } else {
    trend = line.slope;
  }
  if (positive && !(level > 0)) {
    // The line's intercept can dip below zero on steep starts; the first adjusted value cannot.
    for (double v : adjusted) {
      if (std::isfinite(v) && v > 0) {
        level = v;
        break;
      }
    }
  }
  return model::MakeState(level, trend, season);
}

}  // namespace plimsoll::fit
