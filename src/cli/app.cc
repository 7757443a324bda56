#include "plimsoll/cli/app.h"

#include <spdlog/sinks/stdout_color_sinks.h>
#include <spdlog/spdlog.h>

#include <CLI/CLI.hpp>
#include <string>
#include <vector>

#include "cli/commands.h"
#include "plimsoll/version.h"

namespace plimsoll::cli {
namespace {

std::vector<VerbSetup>& Verbs() {
  static std::vector<VerbSetup> verbs;
  return verbs;
}

}  // namespace

bool RegisterVerb(VerbSetup setup) {
  Verbs().push_back(setup);
  return true;
}

int Main(int argc, char** argv) {
  CLI::App app{
      "plimsoll keeps a forecast band (an exponential-smoothing state space model) for every live\n"
      "numeric feed, flags observations that cross it and raises alerts when a feed keeps breaking it."};
  app.set_version_flag("--version", std::string("plimsoll ") + kVersion);
  app.require_subcommand(1);
  app.footer("Run 'plimsoll VERB --help' for the options of one verb.");
  // Logs go to stderr: stdout carries verbs' machine-readable output (--json, addresses).
  spdlog::set_default_logger(spdlog::stderr_color_mt("plimsoll"));
  CommandContext context;
  for (VerbSetup setup : Verbs()) setup(app, context);
  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    return app.exit(e) == 0 ? 0 : 2;
  }
  return context.exit_code;
}

}  // namespace plimsoll::cli
