#pragma once
// ModelSpec: which exponential-smoothing innovations state space form a series uses, in the
// published taxonomy ETS(error, trend, season): error A|M; trend N|A|Ad|M|Md; season N|A|M.
//
// Thread-safety: value type.

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "plimsoll/base/status.h"

namespace plimsoll::model {

// Never renumber: stored on disk (SQLite model rows, state blobs).
enum class ErrorType : uint8_t { kAdditive = 0, kMultiplicative = 1 };
enum class TrendType : uint8_t {
  kNone = 0,
  kAdditive = 1,
  kAdditiveDamped = 2,
  kMultiplicative = 3,        // opt-in
  kMultiplicativeDamped = 4,  // opt-in
};
enum class SeasonType : uint8_t { kNone = 0, kAdditive = 1, kMultiplicative = 2 };

struct ModelSpec {
  ErrorType error = ErrorType::kAdditive;
  TrendType trend = TrendType::kNone;
  SeasonType season = SeasonType::kNone;
  int period = 1;  // season length m; 1 exactly when season == kNone, else >= 2

  bool has_trend() const { return trend != TrendType::kNone; }
  bool damped() const { return trend == TrendType::kAdditiveDamped || trend == TrendType::kMultiplicativeDamped; }
  bool multiplicative_trend() const {
    return trend == TrendType::kMultiplicative || trend == TrendType::kMultiplicativeDamped;
  }
  bool has_season() const { return season != SeasonType::kNone; }
  // True when any component is multiplicative: the form needs strictly positive data.
  bool needs_positive_data() const {
    return error == ErrorType::kMultiplicative || season == SeasonType::kMultiplicative ||
           multiplicative_trend();
  }
  // Numerically stable forms (the default candidate set): no additive error with a
  // multiplicative season or trend, and no multiplicative trend unless opted in.
  bool is_stable() const;

  // "ETS(M,Ad,M)". The period is not part of the notation.
  std::string Notation() const;

  friend bool operator==(const ModelSpec&, const ModelSpec&) = default;
};

// Parses "ETS(M,Ad,M)", "MAdM", "M,Ad,M" (case-insensitive) with the given period, or
// spelled-out words via ParseSpelledModelSpec. Fails naming the offending part, e.g.
// "trend 'X' is not one of N, A, Ad, M, Md". REQUIRES nothing; validates period (>= 2 with a season).
// A non-seasonal form gets period 1 whatever `period` (>= 1) says, so one profile period can
// serve every candidate form.
Result<ModelSpec> ParseModelSpec(std::string_view text, int period);

// Spelled-out form: error "additive"|"multiplicative", trend "none"|"additive"|"additive_damped"|
// "multiplicative"|"multiplicative_damped", season "none"|"additive"|"multiplicative".
Result<ModelSpec> ParseSpelledModelSpec(std::string_view error, std::string_view trend,
                                        std::string_view season, int period);

// All 30 forms for a period (season forms only when period >= 2, so 10 when period == 1).
std::vector<ModelSpec> AllForms(int period);

// The default candidate set for automatic selection: stable forms, trends N/A/Ad only,
// multiplicative error/season only when `positive_data`, season only when `period >= 2`.
std::vector<ModelSpec> DefaultCandidates(int period, bool positive_data);

}  // namespace plimsoll::model
