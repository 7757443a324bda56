// `plimsoll watch`: the daemon. Reads observations from the configured source (stdin, a file;
// Kafka and the embedded broker through [source]), keeps every series' model, flags, alerts and
// commits states with source positions to SQLite. SIGINT/SIGTERM drain and commit, exit 0.
#include <CLI/CLI.hpp>
#include <iostream>
#include <string>

#include "cli/commands.h"
#include "cli/daemon_setup.h"
#include "cli/sources.h"
#include "plimsoll/stream/decode.h"

namespace plimsoll::cli {
namespace {

struct WatchFlags {
  std::string config;
  std::string store;
  std::string input;
  bool follow = false;
};

int RunWatch(const WatchFlags& flags) {
  StopOnSignal stop;
  Result<stream::Config> config = LoadConfig(flags.config);
  if (!config.ok()) {
    std::cerr << "plimsoll watch: " << config.status().message() << "\n";
    return 2;
  }
  if (!flags.store.empty()) config->store.path = flags.store;
  if (!flags.input.empty()) {
    config->source.kind = stream::SourceKind::kFile;
    config->source.path = flags.input;
    config->source.follow = flags.follow;
  }
  if (Status s = ApplyLogging(config->logging); !s.ok()) {
    std::cerr << "plimsoll watch: " << s.message() << "\n";
    return 2;
  }
  Result<std::unique_ptr<stream::Daemon>> daemon = OpenDaemon(*config, SystemClock());
  if (!daemon.ok()) {
    std::cerr << "plimsoll watch: " << daemon.status().ToString() << "\n";
    return 1;
  }
  Result<OpenedSource> source = OpenSource(*config, **daemon);
  if (!source.ok()) {
    std::cerr << "plimsoll watch: " << source.status().ToString() << "\n";
    return 1;
  }
  stream::RecordDecoder decoder(config->source.decode);
  Status run = (*daemon)->Run(*source->source, decoder, stop.requested(), source->sink.get());
  std::cerr << "plimsoll watch: " << RunSummary(**daemon) << "; store " << config->store.path << "\n";
  if (!run.ok()) {
    std::cerr << "plimsoll watch: " << run.ToString() << "\n";
    return 1;
  }
  return 0;
}

void AddWatchVerb(CLI::App& app, CommandContext& context) {
  auto flags = std::make_shared<WatchFlags>();
  CLI::App* cmd = app.add_subcommand("watch", "Run the daemon: model, flag and store every series of a feed");
  cmd->add_option("-c,--config", flags->config, "TOML configuration (default: built-in, stdin source)");
  cmd->add_option("--store", flags->store, "SQLite file, overriding store.path");
  cmd->add_option("--input", flags->input, "read this file instead of the configured source");
  cmd->add_flag("--follow", flags->follow, "with --input: wait for appended lines at the end of the file");
  cmd->callback([flags, &context] { context.exit_code = RunWatch(*flags); });
}

PLIMSOLL_REGISTER_VERB(AddWatchVerb);

}  // namespace
}  // namespace plimsoll::cli
