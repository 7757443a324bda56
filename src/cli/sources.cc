#include "cli/sources.h"

#include "plimsoll/stream/file_source.h"

namespace plimsoll::cli {

Result<OpenedSource> OpenSource(const stream::Config& config, const stream::PositionLookup& positions) {
  OpenedSource opened;
  switch (config.source.kind) {
    case stream::SourceKind::kStdin:
      opened.source = std::make_unique<stream::StdinSource>(config.source);
      return opened;
    case stream::SourceKind::kFile: {
      Result<std::unique_ptr<stream::FileSource>> file = stream::FileSource::Open(config.source, positions);
      if (!file.ok()) return file.status().WithContext("source.path '" + config.source.path + "'");
      opened.source = std::move(file).value();
      return opened;
    }
    case stream::SourceKind::kKafka:
    case stream::SourceKind::kEmbedded:
      break;
  }
  return Status::InvalidArgument("source.kind '" + std::string(stream::SourceKindName(config.source.kind)) +
                                 "' is not available in this build yet");
}

}  // namespace plimsoll::cli
