#pragma once
// LineReader: block reads from a file descriptor, split into newline-terminated records that
// point into the block. Shared by FileSource and StdinSource; see file_source.h for the line,
// position and padding rules it implements.
//
// Thread-safety: one thread at a time.

#include <cstdint>
#include <memory>
#include <vector>

#include "plimsoll/base/status.h"
#include "plimsoll/stream/source.h"

namespace plimsoll::stream {

class LineReader {
 public:
  enum class AtEnd { kFinish, kFollow };  // files and stdin end; followed files wait for growth
  enum class Wait { kNone, kPoll };       // regular files never block; pipes/terminals are polled

  // `fd` is closed on destruction when `owns_fd`. Offsets start at `start_offset`.
  // REQUIRES: buffer_bytes > max_line_bytes >= 1.
  LineReader(int fd, bool owns_fd, size_t buffer_bytes, size_t max_line_bytes, int64_t start_offset,
             AtEnd at_end, Wait wait);
  ~LineReader();
  LineReader(const LineReader&) = delete;
  LineReader& operator=(const LineReader&) = delete;

  // Clears `out` and appends up to `max_records` records (stream_index 0). Blocks at most
  // timeout_ms (Wait::kPoll, or AtEnd::kFollow at the end). Aborted at the end (kFinish) once
  // every line was returned; IoError when read() fails.
  Status Poll(std::vector<RawRecord>& out, size_t max_records, int timeout_ms);

 private:
  // Appends the complete lines in [begin_, end_) to `out`.
  void TakeLines(std::vector<RawRecord>& out, size_t max_records);
  // Appends the line [start, stop) whose terminator (if any) ends at stream offset `next`.
  void Emit(std::vector<RawRecord>& out, size_t start, size_t stop, int64_t offset, int64_t next);
  // Reads once into the free space; returns bytes read (0 at end), or -1 with `status` on error
  // or when nothing arrived within the timeout (status OK).
  int64_t ReadMore(int timeout_ms, Status& status);
  // Stream offset of buf_[i] for i in the contiguous region ending at end_.
  int64_t OffsetOf(size_t i) const { return read_offset_ - static_cast<int64_t>(end_ - i); }

  int fd_;
  bool owns_fd_;
  size_t cap_;
  size_t keep_;  // prefix of an over-long line that is kept and returned (max_line_bytes + 1)
  AtEnd at_end_;
  Wait wait_;
  std::unique_ptr<char[]> buf_;  // cap_ + kRecordPadding bytes
  size_t begin_ = 0;             // first unconsumed byte
  size_t end_ = 0;               // end of valid bytes
  int64_t read_offset_;          // stream offset of the next byte read (the byte after buf_[end_ - 1])
  bool eof_ = false;
  bool finished_ = false;        // Aborted was returned
  // An over-long line being skipped: its kept prefix is buf_[0, keep_), its start offset.
  bool skipping_ = false;
  int64_t skip_start_ = 0;
};

}  // namespace plimsoll::stream
