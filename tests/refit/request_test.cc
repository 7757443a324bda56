#include <catch2/catch.hpp>

#include "plimsoll/refit/refit.h"
#include "plimsoll/store/store.h"
#include "refit/refit_test_util.h"

namespace plimsoll::refit {

TEST_CASE("a refit request counts the stored series it matches and is refused when none or malformed",
          "[refit]") {
  testing::TempDir dir;
  store::StoreOptions options;
  options.path = dir.File("plimsoll.db");
  Result<std::unique_ptr<store::Store>> store = store::Store::Open(options);
  REQUIRE(store.ok());
  store::CommitBatch batch;
  for (const char* name : {"queue-1", "queue-2", "pump-7"}) batch.series.push_back({name, "*", 0});
  REQUIRE((*store)->Commit(batch).ok());

  Result<size_t> matched = RequestRefit(**store, "queue-*", "drift", 1000);
  REQUIRE(matched.ok());
  CHECK(*matched == 2);
  CHECK(RequestRefit(**store, "tank-*", "", 1000).status().code() == StatusCode::kNotFound);
  Result<size_t> bad = RequestRefit(**store, "queue-[1", "", 1000);
  CHECK(bad.status().code() == StatusCode::kInvalidArgument);
  CHECK(bad.status().message().find("queue-[1") != std::string::npos);
  Result<std::vector<store::RefitRequestRecord>> taken = (*store)->TakeRefitRequests();
  REQUIRE(taken.ok());
  REQUIRE(taken->size() == 1);  // only the valid, matching request was recorded
  CHECK((*taken)[0].pattern == "queue-*");
  CHECK((*taken)[0].reason == "drift");
}

}  // namespace plimsoll::refit
