#include "plimsoll/fit/option_text.h"

#include <charconv>
#include <cmath>
#include <string>

namespace plimsoll::fit {
namespace {

std::string_view Trim(std::string_view s) {
  while (!s.empty() && s.front() == ' ') s.remove_prefix(1);
  while (!s.empty() && s.back() == ' ') s.remove_suffix(1);
  return s;
}

bool ParseDouble(std::string_view s, double& out) {
  s = Trim(s);
  auto [ptr, ec] = std::from_chars(s.data(), s.data() + s.size(), out);
  return !s.empty() && ec == std::errc() && ptr == s.data() + s.size() && std::isfinite(out);
}

}  // namespace

Result<ParamControl> ParseParamControl(std::string_view text, std::string_view name) {
  const std::string n(name);
  ParamControl c;
  const size_t colon = text.find(':');
  if (colon == std::string_view::npos) {
    double v = 0;
    if (!ParseDouble(text, v)) {
      return Status::InvalidArgument(n + ": '" + std::string(text) + "' is not a number or a LOW:HIGH range");
    }
    c.fixed = v;
    return c;
  }
  const std::string_view lo = Trim(text.substr(0, colon)), hi = Trim(text.substr(colon + 1));
  double v = 0;
  if (!lo.empty()) {
    if (!ParseDouble(lo, v)) return Status::InvalidArgument(n + ": lower bound '" + std::string(lo) + "' is not a number");
    c.lower = v;
  }
  if (!hi.empty()) {
    if (!ParseDouble(hi, v)) return Status::InvalidArgument(n + ": upper bound '" + std::string(hi) + "' is not a number");
    c.upper = v;
  }
  if (!c.lower && !c.upper) return Status::InvalidArgument(n + ": range '" + std::string(text) + "' has no bounds");
  if (c.lower && c.upper && *c.lower >= *c.upper) {
    return Status::InvalidArgument(n + ": range '" + std::string(text) + "' has lower >= upper");
  }
  return c;
}

Result<std::vector<model::ModelSpec>> ParseFormList(std::string_view text, int period) {
  std::vector<model::ModelSpec> out;
  text = Trim(text);
  if (text.empty() || text == "auto") return out;
  int depth = 0;
  size_t begin = 0;
  for (size_t i = 0; i <= text.size(); ++i) {
    const char ch = i < text.size() ? text[i] : ',';
    if (ch == '(') ++depth;
    if (ch == ')') --depth;
    if (ch != ',' || depth > 0) continue;
    const std::string_view item = Trim(text.substr(begin, i - begin));
    begin = i + 1;
    if (item.empty()) return Status::InvalidArgument("forms: empty entry in '" + std::string(text) + "'");
    auto spec = model::ParseModelSpec(item, std::max(period, 2));
    if (!spec.ok()) return spec.status().WithContext("forms: '" + std::string(item) + "'");
    if (spec->has_season()) {
      if (period < 2) {
        return Status::InvalidArgument("forms: '" + std::string(item) + "' is seasonal but the period is " +
                                       std::to_string(period) + " (set --period)");
      }
      spec->period = period;
    } else {
      spec->period = 1;
    }
    out.push_back(*spec);
  }
  return out;
}

}  // namespace plimsoll::fit
