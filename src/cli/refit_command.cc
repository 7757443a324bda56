// `plimsoll refit SERIES|PATTERN`: asks for a background refit of one series or of every stored
// series matching a glob. The request is a row in the store's refit_requests table: a running
// `watch` takes it within a second, a stopped one at its next start.
#include <CLI/CLI.hpp>
#include <filesystem>
#include <iostream>
#include <memory>
#include <string>

#include "cli/commands.h"
#include "cli/daemon_setup.h"
#include "plimsoll/refit/refit.h"
#include "plimsoll/store/store.h"

namespace plimsoll::cli {
namespace {

struct RefitFlags {
  std::string pattern;
  std::string config;
  std::string store;
  std::string reason;
};

int RunRefit(const RefitFlags& flags) {
  std::string path = flags.store;
  if (path.empty()) {
    Result<stream::Config> config = LoadConfig(flags.config);
    if (!config.ok()) {
      std::cerr << "plimsoll refit: " << config.status().message() << "\n";
      return 2;
    }
    path = config->store.path;
  }
  if (!std::filesystem::exists(path)) {
    std::cerr << "plimsoll refit: store '" << path << "' does not exist (run `plimsoll watch` first)\n";
    return 1;
  }
  store::StoreOptions options;
  options.path = path;
  Result<std::unique_ptr<store::Store>> store = store::Store::Open(options);
  if (!store.ok()) {
    std::cerr << "plimsoll refit: store '" << path << "': " << store.status().ToString() << "\n";
    return 1;
  }
  Result<size_t> matched = refit::RequestRefit(**store, flags.pattern, flags.reason, SystemClock()->WallMillis());
  if (!matched.ok()) {
    std::cerr << "plimsoll refit: " << matched.status().message() << "\n";
    return 1;
  }
  std::cout << "refit requested for " << *matched << " stored series matching '" << flags.pattern
            << "'; a running watch takes it within a second, a stopped one at its next start\n";
  return 0;
}

void AddRefitVerb(CLI::App& app, CommandContext& context) {
  auto flags = std::make_shared<RefitFlags>();
  CLI::App* cmd = app.add_subcommand("refit", "Ask the daemon to refit one series or every series matching a pattern");
  cmd->add_option("series", flags->pattern, "series id or glob pattern (* ? [a-z])")->required();
  cmd->add_option("-c,--config", flags->config, "TOML configuration naming the store");
  cmd->add_option("--store", flags->store, "SQLite file (overrides the configuration)");
  cmd->add_option("--reason", flags->reason, "free text kept with the request");
  cmd->callback([flags, &context] { context.exit_code = RunRefit(*flags); });
}

PLIMSOLL_REGISTER_VERB(AddRefitVerb);

}  // namespace
}  // namespace plimsoll::cli
