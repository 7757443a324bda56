#include "cli/daemon_setup.h"

#include <spdlog/sinks/basic_file_sink.h>
#include <spdlog/spdlog.h>

#include <cerrno>
#include <ctime>
#include <sstream>

#include "plimsoll/fit/fit.h"
#include "plimsoll/refit/refit.h"
#include "plimsoll/stream/fit_chooser.h"

namespace plimsoll::cli {

Result<stream::Config> LoadConfig(const std::string& path) {
  if (path.empty()) return stream::ParseConfig("", "built-in defaults");
  return stream::LoadConfigFile(path);
}

Status ApplyLogging(const stream::LoggingOptions& logging) {
  spdlog::level::level_enum level = spdlog::level::from_str(logging.level);
  if (level == spdlog::level::off && logging.level != "off")
    return Status::InvalidArgument("logging.level: '" + logging.level + "' is not one of trace, debug, info, warn, "
                                   "error, off");
  if (!logging.file.empty()) {
    try {
      spdlog::set_default_logger(spdlog::basic_logger_mt("plimsoll", logging.file));
    } catch (const spdlog::spdlog_ex& e) {
      return Status::IoError("logging.file: " + std::string(e.what()));
    }
  }
  spdlog::set_level(level);
  return Status::Ok();
}

store::StoreOptions StoreOptionsFor(const stream::Config& config) {
  store::StoreOptions options;
  options.path = config.store.path;
  options.synchronous = static_cast<store::Synchronous>(static_cast<int>(config.store.synchronous));
  return options;
}

Result<std::unique_ptr<stream::Daemon>> OpenDaemon(const stream::Config& config, Clock* clock) {
  Result<std::unique_ptr<store::Store>> store = store::Store::Open(StoreOptionsFor(config));
  if (!store.ok()) return store.status().WithContext("store.path '" + config.store.path + "'");
  refit::RefitServiceOptions refit_options = refit::RefitServiceOptionsFromConfig(config);
  // Background fits stop a form at the whole refit's budget; the service keeps the current model
  // when the refit as a whole ran over it.
  fit::FitOptions refit_fit;
  refit_fit.max_seconds_per_form = static_cast<double>(refit_options.time_budget_ms) / 1000.0;
  refit_fit.max_evaluations = config.refit.max_evals;
  std::unique_ptr<stream::RefitService> refits;
  try {
    refits = refit::MakeRefitService(refit_options, stream::MakeFitChooser(refit_fit, clock),
                                     refit::StoreHistoryReaders(StoreOptionsFor(config)), clock);
  } catch (const std::invalid_argument& e) {
    return Status::InvalidArgument(std::string("[refit]: ") + e.what());
  }
  stream::EngineOptions engine_options = stream::EngineOptionsFromConfig(config);
  engine_options.background_warmup = config.refit.background_warmup;
  return stream::Daemon::Open(stream::DaemonOptionsFromConfig(config), std::move(engine_options),
                              stream::MakeFitChooser(fit::FitOptions{}, clock), std::move(store).value(), clock,
                              std::move(refits));
}

StopOnSignal::StopOnSignal() {
  sigemptyset(&signals_);
  sigaddset(&signals_, SIGINT);
  sigaddset(&signals_, SIGTERM);
  pthread_sigmask(SIG_BLOCK, &signals_, nullptr);
  waiter_ = std::thread([this] {
    const timespec tick{0, 100'000'000};
    while (!done_.load()) {
      int signal = sigtimedwait(&signals_, nullptr, &tick);
      if (signal == SIGINT || signal == SIGTERM) {
        spdlog::info("signal {} received: draining and committing", signal);
        requested_.store(true);
      }
    }
  });
}

StopOnSignal::~StopOnSignal() {
  done_.store(true);
  waiter_.join();
}

std::string RunSummary(const stream::Daemon& daemon) {
  const stream::EngineCounters& e = daemon.engine().counters();
  const stream::DaemonCounters& d = daemon.counters();
  std::ostringstream out;
  out << "records " << d.records.load() << ", accepted " << e.observations << ", series "
      << daemon.engine().series_count() << ", flags " << e.flags << ", alerts raised " << e.alerts_raised
      << " / cleared " << e.alerts_cleared << ", dead letters " << e.dead_letters << ", fits " << e.fits
      << " (failed " << e.fit_failures << "), durable commits " << d.commits.load();
  if (const stream::RefitService* refits = daemon.refits()) out << "; " << refits->Summary();
  return out.str();
}

}  // namespace plimsoll::cli
