#pragma once
// Reader for the statsmodels reference fixtures written by make_reference_fixtures.py:
// '# key=value' header lines, then one CSV header line and numeric rows.

#include <map>
#include <string>
#include <vector>

#include "plimsoll/model/params.h"
#include "plimsoll/model/spec.h"
#include "plimsoll/model/state.h"

namespace plimsoll::model::testing {

struct Fixture {
  std::map<std::string, std::string> meta;
  std::vector<std::string> columns;
  std::vector<std::vector<double>> rows;

  // Values of one column; throws std::runtime_error when missing (tests only).
  std::vector<double> Column(const std::string& name) const;
  double MetaNumber(const std::string& key) const;
  ModelSpec Spec() const;
  Params ParamValues() const;
  State InitialState() const;
};

// Throws std::runtime_error naming the file and line on a malformed fixture.
Fixture ReadFixture(const std::string& path);

// Directory of the committed fixtures.
std::string FixtureDir();

// |a - b| <= rel * max(|a|, |b|, 1): relative, with an absolute floor for values near zero.
bool CloseRel(double a, double b, double rel);

}  // namespace plimsoll::model::testing
