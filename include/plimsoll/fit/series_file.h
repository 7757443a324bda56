#pragma once
// Reading a single series from a text file for the `fit` and `outlook` verbs.
//
// Accepted layouts, one record per line: `value` or `time,value` (the time text is kept, not
// interpreted). The first non-blank line may be a header (its value field is not a number).
// Blank lines and lines starting with '#' are ignored. An empty value field, "NA", "NaN" or
// "nan" is a missing observation (NaN). Windows line endings are accepted.
//
// Thread-safety: pure functions.

#include <string>
#include <string_view>
#include <vector>

#include "plimsoll/base/status.h"

namespace plimsoll::fit {

struct SeriesText {
  std::vector<double> values;     // NaN = missing
  std::vector<std::string> times; // one per value when the file has a time column, else empty
  std::vector<int> lines;         // 1-based source line of each value (for error messages)
  bool had_header = false;
};

// Parses `text`. `source` names the input in messages ("parcels.csv"). Fails with
// InvalidArgument naming the line: "parcels.csv line 7: value 'abc' is not a number",
// too many fields, an infinite value, or a file with no values at all.
Result<SeriesText> ParseSeriesText(std::string_view text, std::string_view source);

// Reads and parses the file at `path`. IoError naming the path when it cannot be read.
Result<SeriesText> ReadSeriesFile(const std::string& path);

}  // namespace plimsoll::fit
