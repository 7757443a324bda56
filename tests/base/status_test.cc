#include "plimsoll/base/status.h"

#include <catch2/catch.hpp>

namespace plimsoll {
namespace {

Result<int> ParsePositive(int x) {
  if (x <= 0) return Status::InvalidArgument("value " + std::to_string(x) + " is not positive");
  return x;
}

Status Chain(int x) {
  PLIMSOLL_RETURN_IF_ERROR(ParsePositive(x).status());
  return Status::Ok();
}

}  // namespace

TEST_CASE("status carries code and message and adds context", "[base]") {
  Status ok;
  CHECK(ok.ok());
  CHECK(ok.ToString() == "ok");
  Status bad = Status::InvalidArgument("value is not a number");
  CHECK_FALSE(bad.ok());
  CHECK(bad.code() == StatusCode::kInvalidArgument);
  CHECK(bad.WithContext("line 3").ToString() == "invalid argument: line 3: value is not a number");
  CHECK(ok.WithContext("line 3").ok());
}

TEST_CASE("result holds a value or the error that replaced it", "[base]") {
  auto good = ParsePositive(4);
  REQUIRE(good.ok());
  CHECK(*good == 4);
  auto bad = ParsePositive(-1);
  REQUIRE_FALSE(bad.ok());
  CHECK(bad.status().message() == "value -1 is not positive");
  CHECK(Chain(-2).code() == StatusCode::kInvalidArgument);
  CHECK(Chain(2).ok());
}

}  // namespace plimsoll
