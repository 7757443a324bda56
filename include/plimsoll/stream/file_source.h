#pragma once
// Line sources: FileSource (a file, resumable) and StdinSource (standard input, not resumable).
// Both read large blocks (SourceOptions::read_buffer_bytes, default 1 MiB) and hand out records
// as views into that block, one per line, without copying.
//
// Lines: '\n' ends a line; a '\r' before it is dropped (CRLF files); empty lines are skipped
// (they never reach the decoder); a final line without '\n' is a record at end of input.
// Positions: RawRecord::offset is the line's first byte; next_offset is the byte after its '\n'
// (or the end of input for a final unterminated line). A line that does not fit the read buffer
// is returned truncated to max_record_bytes + 1 bytes (so the decoder refuses it as oversized);
// its offsets still span the whole line, so nothing after it is misread.
// Padding: every payload is followed by at least kRecordPadding readable bytes, so
// RecordDecoder::DecodePadded may parse it in place.
//
// Thread-safety: one thread at a time (the engine's owner thread), as for every RecordSource.

#include <cstdint>
#include <memory>
#include <span>
#include <string>
#include <vector>

#include "plimsoll/base/status.h"
#include "plimsoll/stream/config.h"
#include "plimsoll/stream/source.h"

namespace plimsoll::stream {

class LineReader;  // internal: block reads and line splitting over a file descriptor

// Reads one file. Its stream is StreamId{"file:" + absolute path, 0}; positions are byte offsets.
class FileSource final : public RecordSource {
 public:
  // Opens `options.path` and resumes from the position `lookup` returns for its stream (start of
  // the file when none). Fails with IoError when the file cannot be opened, Corruption when the
  // stored position is beyond the end of the file or not at a line start (the file was replaced
  // or truncated), InvalidArgument for bad options (read_buffer_bytes <= max_record_bytes).
  // With options.follow, reaching the end waits for appended lines instead of ending.
  static Result<std::unique_ptr<FileSource>> Open(const SourceOptions& options, const PositionLookup& lookup);
  ~FileSource() override;
  FileSource(const FileSource&) = delete;
  FileSource& operator=(const FileSource&) = delete;

  // Returns the records of the next complete lines. Without follow: Aborted once the end of the
  // file is reached and every line has been returned. Timeout is used only when following.
  Status Poll(std::vector<RawRecord>& out, size_t max_records, int timeout_ms) override;
  std::span<const StreamId> Streams() const override { return {&stream_, 1}; }
  Status Acknowledge(std::span<const SourcePosition>) override { return Status::Ok(); }
  // A paused source returns no records from Poll (immediately) until resumed.
  Status Pause(const StreamId&) override;
  Status Resume(const StreamId&) override;
  bool PayloadsPadded() const override { return true; }

  // The offset the source started reading at (0, or the stored position it resumed from).
  int64_t start_offset() const { return start_offset_; }

 private:
  FileSource(StreamId stream, std::unique_ptr<LineReader> reader, int64_t start_offset);
  StreamId stream_;
  std::unique_ptr<LineReader> reader_;
  int64_t start_offset_ = 0;
  bool paused_ = false;
};

// Reads standard input (or another descriptor, for tests). Its stream is StreamId{"stdin", 0};
// positions count bytes since the start of this process. stdin cannot be rewound, so a restarted
// daemon cannot resume it: stored positions for "stdin" are informational only.
class StdinSource final : public RecordSource {
 public:
  // Reads from `fd` (default 0), which it does not close. Throws std::invalid_argument when
  // read_buffer_bytes <= max_record_bytes (start-up only).
  explicit StdinSource(const SourceOptions& options, int fd = 0);
  ~StdinSource() override;
  StdinSource(const StdinSource&) = delete;
  StdinSource& operator=(const StdinSource&) = delete;

  // Waits up to timeout_ms for input; Aborted once stdin is closed and every line was returned.
  Status Poll(std::vector<RawRecord>& out, size_t max_records, int timeout_ms) override;
  std::span<const StreamId> Streams() const override { return {&stream_, 1}; }
  Status Acknowledge(std::span<const SourcePosition>) override { return Status::Ok(); }
  Status Pause(const StreamId&) override;
  Status Resume(const StreamId&) override;
  bool PayloadsPadded() const override { return true; }

 private:
  StreamId stream_{"stdin", 0};
  std::unique_ptr<LineReader> reader_;
  bool paused_ = false;
};

}  // namespace plimsoll::stream
