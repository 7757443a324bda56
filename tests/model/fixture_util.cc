#include "model/fixture_util.h"

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <fstream>
#include <sstream>
#include <stdexcept>

namespace plimsoll::model::testing {
namespace {

std::vector<std::string> Split(const std::string& s, char sep) {
  std::vector<std::string> out;
  std::string cur;
  std::istringstream is(s);
  while (std::getline(is, cur, sep)) out.push_back(cur);
  return out;
}

double ToNumber(const std::string& s, const std::string& where) {
  char* end = nullptr;
  double v = std::strtod(s.c_str(), &end);
  if (end == s.c_str() || *end != '\0') throw std::runtime_error(where + ": '" + s + "' is not a number");
  return v;
}

}  // namespace

std::string FixtureDir() { return std::string(PLIMSOLL_SOURCE_DIR) + "/tests/model/fixtures"; }

Fixture ReadFixture(const std::string& path) {
  std::ifstream in(path);
  if (!in) throw std::runtime_error("cannot open fixture " + path);
  Fixture f;
  std::string line;
  int line_no = 0;
  while (std::getline(in, line)) {
    ++line_no;
    const std::string where = path + ":" + std::to_string(line_no);
    if (line.empty()) continue;
    if (line[0] == '#') {
      size_t eq = line.find('=');
      if (eq == std::string::npos) throw std::runtime_error(where + ": header without '='");
      f.meta[line.substr(2, eq - 2)] = line.substr(eq + 1);
    } else if (f.columns.empty()) {
      f.columns = Split(line, ',');
    } else {
      std::vector<double> row;
      for (const std::string& cell : Split(line, ',')) row.push_back(ToNumber(cell, where));
      if (row.size() != f.columns.size()) throw std::runtime_error(where + ": wrong number of cells");
      f.rows.push_back(std::move(row));
    }
  }
  return f;
}

std::vector<double> Fixture::Column(const std::string& name) const {
  auto it = std::find(columns.begin(), columns.end(), name);
  if (it == columns.end()) throw std::runtime_error("fixture has no column " + name);
  const size_t idx = static_cast<size_t>(it - columns.begin());
  std::vector<double> out;
  for (const auto& r : rows) out.push_back(r[idx]);
  return out;
}

double Fixture::MetaNumber(const std::string& key) const {
  auto it = meta.find(key);
  if (it == meta.end()) throw std::runtime_error("fixture has no header " + key);
  return ToNumber(it->second, key);
}

ModelSpec Fixture::Spec() const {
  auto spec = ParseModelSpec(meta.at("form"), static_cast<int>(MetaNumber("period")));
  if (!spec.ok()) throw std::runtime_error(spec.status().ToString());
  return *spec;
}

Params Fixture::ParamValues() const {
  return Params{MetaNumber("alpha"), MetaNumber("beta"), MetaNumber("gamma"), MetaNumber("phi")};
}

State Fixture::InitialState() const {
  std::vector<double> season;
  const std::string& text = meta.at("initial_seasonal");
  if (!text.empty()) {
    for (const std::string& cell : Split(text, ';')) season.push_back(ToNumber(cell, "initial_seasonal"));
  }
  return MakeState(MetaNumber("initial_level"), MetaNumber("initial_trend"), season);
}

bool CloseRel(double a, double b, double rel) {
  return std::abs(a - b) <= rel * std::max({std::abs(a), std::abs(b), 1.0});
}

}  // namespace plimsoll::model::testing
