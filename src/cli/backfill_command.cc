// `plimsoll backfill`: loads a history file into the store through the same engine as `watch`
// (so each series is fitted at warm-up and its state is advanced to the end of the file), with a
// progress bar on stderr. Resumable: a second run continues where the first stopped.
#include <sys/stat.h>
#include <unistd.h>

#include <CLI/CLI.hpp>
#include <chrono>
#include <cstdio>
#include <iostream>
#include <string>
#include <thread>

#include "cli/commands.h"
#include "cli/daemon_setup.h"
#include "cli/sources.h"
#include "plimsoll/stream/decode.h"

namespace plimsoll::cli {
namespace {

struct BackfillFlags {
  std::string config;
  std::string store;
  std::string file;
  bool quiet = false;
};

void DrawProgress(int64_t done, int64_t total, uint64_t records, double seconds) {
  constexpr int kWidth = 40;
  const double fraction = total > 0 ? std::min(1.0, static_cast<double>(done) / static_cast<double>(total)) : 1.0;
  const int filled = static_cast<int>(fraction * kWidth);
  std::fprintf(stderr, "\r[%s%s] %5.1f%%  %llu records  %.0f records/s ", std::string(filled, '#').c_str(),
               std::string(kWidth - filled, '.').c_str(), 100.0 * fraction, static_cast<unsigned long long>(records),
               seconds > 0 ? static_cast<double>(records) / seconds : 0.0);
}

int RunBackfill(const BackfillFlags& flags) {
  StopOnSignal stop;
  Result<stream::Config> config = LoadConfig(flags.config);
  if (!config.ok()) {
    std::cerr << "plimsoll backfill: " << config.status().message() << "\n";
    return 2;
  }
  if (!flags.store.empty()) config->store.path = flags.store;
  config->source.kind = stream::SourceKind::kFile;
  config->source.path = flags.file;
  config->source.follow = false;
  if (Status s = ApplyLogging(config->logging); !s.ok()) {
    std::cerr << "plimsoll backfill: " << s.message() << "\n";
    return 2;
  }
  struct stat info {};
  if (::stat(flags.file.c_str(), &info) != 0) {
    std::cerr << "plimsoll backfill: cannot read '" << flags.file << "'\n";
    return 1;
  }
  Result<std::unique_ptr<stream::Daemon>> daemon = OpenDaemon(*config, SystemClock());
  if (!daemon.ok()) {
    std::cerr << "plimsoll backfill: " << daemon.status().ToString() << "\n";
    return 1;
  }
  Result<OpenedSource> source = OpenSource(*config, **daemon);
  if (!source.ok()) {
    std::cerr << "plimsoll backfill: " << source.status().ToString() << "\n";
    return 1;
  }
  stream::RecordDecoder decoder(config->source.decode);
  const bool show = !flags.quiet && ::isatty(STDERR_FILENO);
  std::atomic<bool> finished{false};
  const auto start = std::chrono::steady_clock::now();
  std::thread progress([&] {
    while (show && !finished.load()) {
      const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
      DrawProgress((*daemon)->counters().position.load(), info.st_size, (*daemon)->counters().records.load(), seconds);
      std::this_thread::sleep_for(std::chrono::milliseconds(200));
    }
  });
  Status run = (*daemon)->Run(*source->source, decoder, stop.requested(), nullptr);
  finished.store(true);
  progress.join();
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  if (show) {
    DrawProgress(info.st_size, info.st_size, (*daemon)->counters().records.load(), seconds);
    std::fprintf(stderr, "\n");
  }
  const stream::Engine& engine = (*daemon)->engine();
  size_t warming = 0;
  for (stream::SeriesId id = 0; id < engine.series_count(); ++id) warming += engine.View(id).warming_up ? 1 : 0;
  std::cerr << "plimsoll backfill: " << RunSummary(**daemon) << "\n";
  if (warming > 0)
    std::cerr << "plimsoll backfill: " << warming << " series have fewer points than their profile's warmup "
              << "and no model yet; they are fitted when enough points arrive\n";
  std::cerr << "plimsoll backfill: store " << config->store.path << "\n";
  if (!run.ok()) {
    std::cerr << "plimsoll backfill: " << run.ToString() << "\n";
    return 1;
  }
  return 0;
}

void AddBackfillVerb(CLI::App& app, CommandContext& context) {
  auto flags = std::make_shared<BackfillFlags>();
  CLI::App* cmd = app.add_subcommand("backfill", "Load a history file into the store, fitting each series");
  cmd->add_option("file", flags->file, "CSV (series,time,value) or JSON lines")->required();
  cmd->add_option("-c,--config", flags->config, "TOML configuration (profiles, store)");
  cmd->add_option("--store", flags->store, "SQLite file, overriding store.path");
  cmd->add_flag("-q,--quiet", flags->quiet, "no progress bar");
  cmd->callback([flags, &context] { context.exit_code = RunBackfill(*flags); });
}

PLIMSOLL_REGISTER_VERB(AddBackfillVerb);

}  // namespace
}  // namespace plimsoll::cli
