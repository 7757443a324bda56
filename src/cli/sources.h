#pragma once
// Opens the record source the configuration's [source] section names and, for Kafka, the output
// sink (flags, alerts, model changes, dead letters to topics) and, for "embedded", an in-process
// broker.

#include <memory>

#include "plimsoll/base/status.h"
#include "plimsoll/stream/config.h"
#include "plimsoll/stream/daemon.h"
#include "plimsoll/stream/source.h"

namespace plimsoll::cli {

struct OpenedSource {
  std::shared_ptr<void> broker;                // embedded broker; declared first so it outlives its clients
  std::unique_ptr<stream::OutputSink> sink;    // null when outputs stay in SQLite only
  std::unique_ptr<stream::RecordSource> source;
  std::string bootstrap;                       // Kafka kinds: the bootstrap address used
};

// Resumes streams from daemon.Positions(); Kafka revokes flush through daemon.Listener().
Result<OpenedSource> OpenSource(const stream::Config& config, stream::Daemon& daemon);

}  // namespace plimsoll::cli
