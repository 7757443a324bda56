// Regenerates the statsmodels fixtures with make_reference_fixtures.py into a scratch directory
// and requires them to equal the committed ones byte for byte, so a fixture cannot drift from
// the script (and the statsmodels version) that claims to have produced it.
#include <catch2/catch.hpp>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <set>
#include <sstream>
#include <string>

#include "model/fixture_util.h"

namespace plimsoll::model {
namespace {

std::string Slurp(const std::filesystem::path& p) {
  std::ifstream in(p, std::ios::binary);
  std::ostringstream os;
  os << in.rdbuf();
  return os.str();
}

std::set<std::string> CsvNames(const std::filesystem::path& dir) {
  std::set<std::string> out;
  for (const auto& entry : std::filesystem::directory_iterator(dir)) {
    if (entry.path().extension() == ".csv") out.insert(entry.path().filename().string());
  }
  return out;
}

TEST_CASE("committed fixtures equal freshly regenerated statsmodels output", "[model][reference]") {
  if (std::system("/usr/bin/python3 -c 'import statsmodels' >/dev/null 2>&1") != 0) {
    WARN("python3-statsmodels is not importable by /usr/bin/python3: fixture regeneration not checked");
    SUCCEED("skipped: statsmodels missing");
    return;
  }
  const std::filesystem::path out = std::filesystem::path(PLIMSOLL_BINARY_DIR) / "model-fixtures-regenerated";
  std::filesystem::remove_all(out);
  std::filesystem::create_directories(out);
  const std::string cmd = std::string("/usr/bin/python3 '") + PLIMSOLL_SOURCE_DIR +
                          "/tests/model/make_reference_fixtures.py' '" + out.string() + "'";
  REQUIRE(std::system(cmd.c_str()) == 0);
  const std::filesystem::path committed = testing::FixtureDir();
  const auto names = CsvNames(committed);
  REQUIRE(names.size() >= 15);
  CHECK(CsvNames(out) == names);
  for (const std::string& name : names) {
    INFO(name);
    CHECK(Slurp(out / name) == Slurp(committed / name));
  }
}

}  // namespace
}  // namespace plimsoll::model
