#pragma once
// Text forms of fit options, as the CLI (and config files) spell them.
//
// Thread-safety: pure functions.

#include <string_view>
#include <vector>

#include "plimsoll/base/status.h"
#include "plimsoll/fit/fit.h"
#include "plimsoll/model/spec.h"

namespace plimsoll::fit {

// "0.3" -> fixed 0.3; "0.1:0.5" -> range [0.1, 0.5]; ":0.5" / "0.1:" -> one-sided range.
// Fails with InvalidArgument naming `name` when a part is not a number or lower >= upper.
// Region checks happen later, in ValidateOptions.
Result<ParamControl> ParseParamControl(std::string_view text, std::string_view name);

// A comma-separated list of forms, e.g. "ETS(A,Ad,A),ETS(M,N,M)" or "AAdA,MNM" (commas inside
// parentheses belong to a form). Seasonal forms get `period`; non-seasonal ones period 1.
// "auto" or "" -> empty list (the default candidates). Fails naming the offending entry, and
// for a seasonal form when period < 2.
Result<std::vector<model::ModelSpec>> ParseFormList(std::string_view text, int period);

}  // namespace plimsoll::fit
