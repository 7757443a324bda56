#include "plimsoll/fit/series_file.h"

#include <cerrno>
#include <charconv>
#include <cmath>
#include <fstream>
#include <limits>
#include <sstream>

namespace plimsoll::fit {
namespace {

std::string_view Trim(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\t' || s.back() == '\r')) s.remove_suffix(1);
  return s;
}

bool IsMissing(std::string_view s) { return s.empty() || s == "NA" || s == "NaN" || s == "nan"; }

// Parses the whole of `s` as a decimal number; false when anything is left over.
bool ParseNumber(std::string_view s, double& out) {
  if (!s.empty() && s.front() == '+') s.remove_prefix(1);
  const char* end = s.data() + s.size();
  auto [ptr, ec] = std::from_chars(s.data(), end, out);
  return ec == std::errc() && ptr == end;
}

}  // namespace

Result<SeriesText> ParseSeriesText(std::string_view text, std::string_view source) {
  SeriesText out;
  const std::string where(source);
  int line_no = 0;
  bool seen_record = false;
  size_t fields_expected = 0;
  while (!text.empty()) {
    const size_t eol = text.find('\n');
    std::string_view line = Trim(text.substr(0, eol));
    text.remove_prefix(eol == std::string_view::npos ? text.size() : eol + 1);
    ++line_no;
    if (line.empty() || line.front() == '#') continue;

    const std::string at = where + " line " + std::to_string(line_no) + ": ";
    std::string_view time, value = line;
    size_t fields = 1;
    if (const size_t comma = line.find(','); comma != std::string_view::npos) {
      if (line.find(',', comma + 1) != std::string_view::npos) {
        return Status::InvalidArgument(at + "expected 'value' or 'time,value', found more than two fields");
      }
      time = Trim(line.substr(0, comma));
      value = Trim(line.substr(comma + 1));
      fields = 2;
    }
    double v = std::numeric_limits<double>::quiet_NaN();
    const bool missing = IsMissing(value);
    if (!missing && !ParseNumber(value, v)) {
      if (!seen_record) {  // the first record may be a header
        seen_record = true;
        out.had_header = true;
        fields_expected = fields;
        continue;
      }
      return Status::InvalidArgument(at + "value '" + std::string(value) + "' is not a number");
    }
    if (!missing && !std::isfinite(v)) {
      return Status::InvalidArgument(at + "value '" + std::string(value) + "' is not finite");
    }
    if (fields_expected != 0 && fields != fields_expected) {
      return Status::InvalidArgument(at + "has " + std::to_string(fields) + " field(s); earlier lines have " +
                                     std::to_string(fields_expected));
    }
    seen_record = true;
    fields_expected = fields;
    if (fields == 2) out.times.emplace_back(time);
    out.values.push_back(v);
    out.lines.push_back(line_no);
  }
  if (out.values.empty()) {
    return Status::InvalidArgument(where + ": no values (the file is empty or holds only a header/comments)");
  }
  return out;
}

Result<SeriesText> ReadSeriesFile(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return Status::IoError(path + ": cannot open for reading");
  std::ostringstream buffer;
  buffer << in.rdbuf();
  if (in.bad()) return Status::IoError(path + ": read failed");
  return ParseSeriesText(buffer.str(), path);
}

}  // namespace plimsoll::fit
