#pragma once
// Opens the record source (and, for Kafka, the output sink and the embedded broker) that the
// configuration's [source] section names.

#include <memory>

#include "plimsoll/base/status.h"
#include "plimsoll/stream/config.h"
#include "plimsoll/stream/daemon.h"
#include "plimsoll/stream/source.h"

namespace plimsoll::cli {

struct OpenedSource {
  std::shared_ptr<void> keep_alive;            // what the source needs to outlive it (embedded broker)
  std::unique_ptr<stream::RecordSource> source;
  std::unique_ptr<stream::OutputSink> sink;    // null when outputs stay in SQLite only
};

// `positions`: where each stream resumes (Daemon::Positions()).
Result<OpenedSource> OpenSource(const stream::Config& config, const stream::PositionLookup& positions);

}  // namespace plimsoll::cli
