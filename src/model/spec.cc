// ModelSpec: taxonomy notation, parsing and the candidate sets.
#include "plimsoll/model/spec.h"

#include <cctype>
#include <string>

namespace plimsoll::model {
namespace {

std::string Lower(std::string_view s) {
  std::string out;
  out.reserve(s.size());
  for (char c : s) out.push_back(static_cast<char>(std::tolower(static_cast<unsigned char>(c))));
  return out;
}

std::string_view Trim(std::string_view s) {
  while (!s.empty() && std::isspace(static_cast<unsigned char>(s.front()))) s.remove_prefix(1);
  while (!s.empty() && std::isspace(static_cast<unsigned char>(s.back()))) s.remove_suffix(1);
  return s;
}

std::string_view ErrorCode(ErrorType e) { return e == ErrorType::kAdditive ? "A" : "M"; }

std::string_view TrendCode(TrendType t) {
  switch (t) {
    case TrendType::kNone: return "N";
    case TrendType::kAdditive: return "A";
    case TrendType::kAdditiveDamped: return "Ad";
    case TrendType::kMultiplicative: return "M";
    case TrendType::kMultiplicativeDamped: return "Md";
  }
  return "?";
}

std::string_view SeasonCode(SeasonType s) {
  switch (s) {
    case SeasonType::kNone: return "N";
    case SeasonType::kAdditive: return "A";
    case SeasonType::kMultiplicative: return "M";
  }
  return "?";
}

Result<ErrorType> ParseErrorCode(std::string_view raw) {
  std::string c = Lower(Trim(raw));
  if (c == "a") return ErrorType::kAdditive;
  if (c == "m") return ErrorType::kMultiplicative;
  return Status::InvalidArgument("error '" + std::string(raw) + "' is not one of A, M");
}

Result<TrendType> ParseTrendCode(std::string_view raw) {
  std::string c = Lower(Trim(raw));
  if (c == "n") return TrendType::kNone;
  if (c == "a") return TrendType::kAdditive;
  if (c == "ad") return TrendType::kAdditiveDamped;
  if (c == "m") return TrendType::kMultiplicative;
  if (c == "md") return TrendType::kMultiplicativeDamped;
  return Status::InvalidArgument("trend '" + std::string(raw) + "' is not one of N, A, Ad, M, Md");
}

Result<SeasonType> ParseSeasonCode(std::string_view raw) {
  std::string c = Lower(Trim(raw));
  if (c == "n") return SeasonType::kNone;
  if (c == "a") return SeasonType::kAdditive;
  if (c == "m") return SeasonType::kMultiplicative;
  return Status::InvalidArgument("season '" + std::string(raw) + "' is not one of N, A, M");
}

Result<ModelSpec> Assemble(const Result<ErrorType>& e, const Result<TrendType>& t, const Result<SeasonType>& s,
                           int period) {
  if (!e.ok()) return e.status();
  if (!t.ok()) return t.status();
  if (!s.ok()) return s.status();
  ModelSpec spec{*e, *t, *s, 1};
  if (spec.has_season()) {
    if (period < 2) {
      return Status::InvalidArgument("season period " + std::to_string(period) +
                                     " is too short for a seasonal form (need >= 2)");
    }
    spec.period = period;
  } else if (period < 1) {
    return Status::InvalidArgument("season period " + std::to_string(period) + " must be >= 1");
  }
  return spec;
}

}  // namespace

bool ModelSpec::is_stable() const {
  if (multiplicative_trend()) return false;
  return !(error == ErrorType::kAdditive && season == SeasonType::kMultiplicative);
}

std::string ModelSpec::Notation() const {
  std::string out = "ETS(";
  out += ErrorCode(error);
  out += ',';
  out += TrendCode(trend);
  out += ',';
  out += SeasonCode(season);
  out += ')';
  return out;
}

Result<ModelSpec> ParseModelSpec(std::string_view text, int period) {
  std::string_view body = Trim(text);
  const std::string original(text);
  if (body.empty()) return Status::InvalidArgument("model spec is empty");
  std::string lowered = Lower(body);
  bool wrapped = false;
  if (lowered.starts_with("ets")) {
    body.remove_prefix(3);
    body = Trim(body);
    if (body.size() < 2 || body.front() != '(' || body.back() != ')') {
      return Status::InvalidArgument("model spec '" + original + "': expected ETS(error,trend,season)");
    }
    body = Trim(body.substr(1, body.size() - 2));
    wrapped = true;
  }
  if (body.find(',') != std::string_view::npos) {
    size_t c1 = body.find(',');
    size_t c2 = body.find(',', c1 + 1);
    if (c2 == std::string_view::npos || body.find(',', c2 + 1) != std::string_view::npos) {
      return Status::InvalidArgument("model spec '" + original + "': expected three parts error,trend,season");
    }
    auto r = Assemble(ParseErrorCode(body.substr(0, c1)), ParseTrendCode(body.substr(c1 + 1, c2 - c1 - 1)),
                      ParseSeasonCode(body.substr(c2 + 1)), period);
    if (!r.ok()) return r.status().WithContext("model spec '" + original + "'");
    return r;
  }
  if (wrapped) {
    return Status::InvalidArgument("model spec '" + original + "': expected commas inside ETS(...)");
  }
  // Compact form "MAdM": one letter error, one or two letters trend, one letter season.
  if (body.size() != 3 && body.size() != 4) {
    return Status::InvalidArgument("model spec '" + original +
                                   "' is not ETS(E,T,S), E,T,S or a compact form like MAdM");
  }
  auto r = Assemble(ParseErrorCode(body.substr(0, 1)), ParseTrendCode(body.substr(1, body.size() - 2)),
                    ParseSeasonCode(body.substr(body.size() - 1)), period);
  if (!r.ok()) return r.status().WithContext("model spec '" + original + "'");
  return r;
}

Result<ModelSpec> ParseSpelledModelSpec(std::string_view error, std::string_view trend, std::string_view season,
                                        int period) {
  Result<ErrorType> e = Status::InvalidArgument("error '" + std::string(error) +
                                                "' is not one of additive, multiplicative");
  std::string el = Lower(Trim(error));
  if (el == "additive") e = ErrorType::kAdditive;
  if (el == "multiplicative") e = ErrorType::kMultiplicative;

  Result<TrendType> t = Status::InvalidArgument(
      "trend '" + std::string(trend) +
      "' is not one of none, additive, additive_damped, multiplicative, multiplicative_damped");
  std::string tl = Lower(Trim(trend));
  if (tl == "none") t = TrendType::kNone;
  if (tl == "additive") t = TrendType::kAdditive;
  if (tl == "additive_damped") t = TrendType::kAdditiveDamped;
  if (tl == "multiplicative") t = TrendType::kMultiplicative;
  if (tl == "multiplicative_damped") t = TrendType::kMultiplicativeDamped;

  Result<SeasonType> s = Status::InvalidArgument("season '" + std::string(season) +
                                                 "' is not one of none, additive, multiplicative");
  std::string sl = Lower(Trim(season));
  if (sl == "none") s = SeasonType::kNone;
  if (sl == "additive") s = SeasonType::kAdditive;
  if (sl == "multiplicative") s = SeasonType::kMultiplicative;
  return Assemble(e, t, s, period);
}

std::vector<ModelSpec> AllForms(int period) {
  std::vector<ModelSpec> out;
  for (ErrorType e : {ErrorType::kAdditive, ErrorType::kMultiplicative}) {
    for (TrendType t : {TrendType::kNone, TrendType::kAdditive, TrendType::kAdditiveDamped,
                        TrendType::kMultiplicative, TrendType::kMultiplicativeDamped}) {
      for (SeasonType s : {SeasonType::kNone, SeasonType::kAdditive, SeasonType::kMultiplicative}) {
        if (s != SeasonType::kNone && period < 2) continue;
        out.push_back(ModelSpec{e, t, s, s == SeasonType::kNone ? 1 : period});
      }
    }
  }
  return out;
}

std::vector<ModelSpec> DefaultCandidates(int period, bool positive_data) {
  std::vector<ModelSpec> out;
  for (const ModelSpec& spec : AllForms(period)) {
    if (!spec.is_stable()) continue;
    if (!positive_data && spec.needs_positive_data()) continue;
    out.push_back(spec);
  }
  return out;
}

}  // namespace plimsoll::model
