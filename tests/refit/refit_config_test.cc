#include <catch2/catch.hpp>

#include "plimsoll/refit/refit.h"
#include "plimsoll/stream/config.h"

namespace plimsoll::refit {

TEST_CASE("refit keys reach the service options; profiles inherit on_alert and may override it", "[refit]") {
  Result<stream::Config> config = stream::ParseConfig(R"(
[refit]
threads = 3
on_alert = false
queue = 50
time_budget = "2s"
max_evals = 500
max_lag = 77
background_warmup = false
[[profile]]
match = "a-*"
refit_every = 10
refit_on_alert = true
[[profile]]
match = "*"
refit_max_age = "1h"
)");
  REQUIRE(config.ok());
  CHECK(config->refit.max_evals == 500);
  CHECK_FALSE(config->refit.background_warmup);
  RefitServiceOptions options = RefitServiceOptionsFromConfig(*config);
  CHECK(options.threads == 3);
  CHECK(options.queue_capacity == 50);
  CHECK(options.time_budget_ms == 2000);
  CHECK(options.max_lag_steps == 77);
  REQUIRE(options.profiles.size() == 2);
  CHECK(options.profiles[0].every == 10);
  CHECK(options.profiles[0].on_alert);
  CHECK(options.profiles[1].max_age_ms == std::optional<int64_t>(3'600'000));
  CHECK_FALSE(options.profiles[1].on_alert);  // inherited from [refit]
}

TEST_CASE("the default thread count is cores - 1 and at least 1", "[refit]") {
  Result<stream::Config> config = stream::ParseConfig("");
  REQUIRE(config.ok());
  CHECK(RefitServiceOptionsFromConfig(*config).threads == DefaultThreads());
  CHECK(DefaultThreads() >= 1);
  CHECK(config->refit.background_warmup);
  CHECK(config->profiles[0].refit_on_alert);
}

TEST_CASE("bad refit keys are refused naming the key", "[refit]") {
  for (const auto& [text, key] : std::vector<std::pair<std::string, std::string>>{
           {"[refit]\nmax_lag = 0\n", "max_lag"},
           {"[refit]\nmax_evals = 3\n", "max_evals"},
           {"[refit]\nbackground_warmup = 1\n", "background_warmup"},
           {"[[profile]]\nrefit_on_alert = \"yes\"\n", "refit_on_alert"},
       }) {
    INFO(text);
    Result<stream::Config> config = stream::ParseConfig(text, "t.toml");
    REQUIRE_FALSE(config.ok());
    CHECK(config.status().message().find(key) != std::string::npos);
  }
}

}  // namespace plimsoll::refit
