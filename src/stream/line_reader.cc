#include "line_reader.h"

#include <poll.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstring>

#include "plimsoll/stream/decode.h"

namespace plimsoll::stream {

LineReader::LineReader(int fd, bool owns_fd, size_t buffer_bytes, size_t max_line_bytes, int64_t start_offset,
                       AtEnd at_end, Wait wait)
    : fd_(fd),
      owns_fd_(owns_fd),
      // The buffer must hold a kept prefix of an over-long line plus room to read past it.
      cap_(std::max(buffer_bytes, max_line_bytes + 4096)),
      keep_(max_line_bytes + 1),
      at_end_(at_end),
      wait_(wait),
      buf_(std::make_unique<char[]>(cap_ + kRecordPadding)),  // zeroed: padding is never uninitialised
      read_offset_(start_offset) {}

LineReader::~LineReader() {
  if (owns_fd_ && fd_ >= 0) ::close(fd_);
}

void LineReader::Emit(std::vector<RawRecord>& out, size_t start, size_t stop, int64_t offset, int64_t next) {
  if (stop > start && buf_[stop - 1] == '\r') --stop;
  if (stop == start) return;  // blank line: nothing to decode
  RawRecord r;
  r.payload = std::string_view(buf_.get() + start, stop - start);
  r.offset = offset;
  r.next_offset = next;
  out.push_back(r);
}

void LineReader::TakeLines(std::vector<RawRecord>& out, size_t max_records) {
  while (out.size() < max_records && begin_ < end_) {
    const void* nl = std::memchr(buf_.get() + begin_, '\n', end_ - begin_);
    if (nl == nullptr) {
      if (skipping_) begin_ = end_ = keep_;  // discard the middle of an over-long line
      return;
    }
    const size_t q = static_cast<size_t>(static_cast<const char*>(nl) - buf_.get());
    const int64_t next = OffsetOf(q) + 1;
    if (skipping_) {
      skipping_ = false;
      begin_ = q + 1;
      Emit(out, 0, keep_, skip_start_, next);
      continue;
    }
    const size_t start = begin_;
    begin_ = q + 1;
    Emit(out, start, q, OffsetOf(start), next);
  }
}

int64_t LineReader::ReadMore(int timeout_ms, Status& status) {
  status = Status::Ok();
  if (wait_ == Wait::kPoll) {
    pollfd p{fd_, POLLIN, 0};
    int rc;
    do rc = ::poll(&p, 1, timeout_ms);
    while (rc < 0 && errno == EINTR);
    if (rc < 0) {
      status = Status::IoError(std::string("poll on input failed: ") + std::strerror(errno));
      return -1;
    }
    if (rc == 0) return -1;  // timeout
  }
  ssize_t n;
  do n = ::read(fd_, buf_.get() + end_, cap_ - end_);
  while (n < 0 && errno == EINTR);
  if (n < 0) {
    if (errno == EAGAIN || errno == EWOULDBLOCK) return -1;
    status = Status::IoError(std::string("read failed: ") + std::strerror(errno));
    return -1;
  }
  end_ += static_cast<size_t>(n);
  read_offset_ += n;
  return n;
}

Status LineReader::Poll(std::vector<RawRecord>& out, size_t max_records, int timeout_ms) {
  out.clear();
  if (finished_) return Status::Aborted("end of input");
  while (true) {
    TakeLines(out, max_records);
    if (!out.empty()) return Status::Ok();
    if (eof_) {
      if (skipping_) {
        skipping_ = false;
        begin_ = end_;
        Emit(out, 0, keep_, skip_start_, read_offset_);
        return Status::Ok();
      }
      if (begin_ < end_) {  // final line without '\n'
        const size_t start = begin_;
        begin_ = end_;
        Emit(out, start, end_, OffsetOf(start), read_offset_);
        if (!out.empty()) return Status::Ok();
      }
      finished_ = true;
      return Status::Aborted("end of input");
    }
    // No complete line is buffered: make room, then read. Views handed out by the previous
    // Poll may be overwritten from here on (their contract ends at this call).
    if (!skipping_) {
      if (begin_ > 0) {
        std::memmove(buf_.get(), buf_.get() + begin_, end_ - begin_);
        end_ -= begin_;
        begin_ = 0;
      }
      if (end_ == cap_) {  // a line longer than the buffer: keep its prefix, skip the rest
        skipping_ = true;
        skip_start_ = OffsetOf(0);
        begin_ = end_ = keep_;
      }
    }
    Status status;
    const int64_t n = ReadMore(timeout_ms, status);
    if (n < 0) return status;  // error, or OK with no records on timeout
    if (n == 0) {
      if (at_end_ == AtEnd::kFollow) {
        ::poll(nullptr, 0, std::clamp(timeout_ms, 0, 50));  // wait briefly for appended lines
        return Status::Ok();
      }
      eof_ = true;
    }
  }
}

}  // namespace plimsoll::stream
