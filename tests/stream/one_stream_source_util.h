#pragma once
// Base of the in-memory sources of tests and benchmarks: one stream, nothing to acknowledge,
// pause or resume, so a feed only writes Poll.

#include <span>
#include <string>
#include <utility>
#include <vector>

#include "plimsoll/stream/source.h"

namespace plimsoll::stream::testing {

class OneStreamSource : public RecordSource {
 public:
  explicit OneStreamSource(std::string stream_name) : streams_{{std::move(stream_name), 0}} {}
  std::span<const StreamId> Streams() const override { return streams_; }
  Status Acknowledge(std::span<const SourcePosition>) override { return Status::Ok(); }
  Status Pause(const StreamId&) override { return Status::Ok(); }
  Status Resume(const StreamId&) override { return Status::Ok(); }

 private:
  std::vector<StreamId> streams_;
};

}  // namespace plimsoll::stream::testing
