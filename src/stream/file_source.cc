#include "plimsoll/stream/file_source.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <filesystem>
#include <stdexcept>

#include "line_reader.h"

namespace plimsoll::stream {
namespace {

Status CheckBuffer(const SourceOptions& options) {
  PLIMSOLL_RETURN_IF_ERROR(options.decode.Validate());
  if (options.read_buffer_bytes <= options.decode.max_record_bytes) {
    return Status::InvalidArgument("read_buffer_bytes " + std::to_string(options.read_buffer_bytes) +
                                   " must exceed max_record_bytes " +
                                   std::to_string(options.decode.max_record_bytes));
  }
  return Status::Ok();
}

std::string Errno() { return std::strerror(errno); }

}  // namespace

FileSource::FileSource(StreamId stream, std::unique_ptr<LineReader> reader, int64_t start_offset)
    : stream_(std::move(stream)), reader_(std::move(reader)), start_offset_(start_offset) {}

FileSource::~FileSource() = default;

Result<std::unique_ptr<FileSource>> FileSource::Open(const SourceOptions& options, const PositionLookup& lookup) {
  PLIMSOLL_RETURN_IF_ERROR(CheckBuffer(options));
  if (options.path.empty()) return Status::InvalidArgument("source.path is empty");
  std::error_code ec;
  std::filesystem::path abs = std::filesystem::absolute(options.path, ec);
  StreamId stream{"file:" + (ec ? options.path : abs.lexically_normal().string()), 0};

  const int fd = ::open(options.path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return Status::IoError("cannot open '" + options.path + "': " + Errno());
  // The reader owns the descriptor from here on, so every early return closes it.
  struct stat st {};
  if (::fstat(fd, &st) != 0 || S_ISDIR(st.st_mode)) {
    const std::string why = S_ISDIR(st.st_mode) ? "is a directory" : Errno();
    ::close(fd);
    return Status::IoError("cannot read '" + options.path + "': " + why);
  }
  const bool regular = S_ISREG(st.st_mode);
  int64_t start = 0;
  if (lookup) {
    if (std::optional<int64_t> stored = lookup(stream)) start = *stored;
  }
  auto fail = [&](Status s) {
    ::close(fd);
    return s;
  };
  if (start != 0) {
    if (!regular) return fail(Status::InvalidArgument(stream.name + " is not a regular file; cannot resume at " +
                                                      std::to_string(start)));
    if (start < 0 || start > st.st_size) {
      return fail(Status::Corruption("stored position " + std::to_string(start) + " of " + stream.name +
                                     " is beyond its end (" + std::to_string(st.st_size) +
                                     " bytes); was the file truncated or replaced?"));
    }
    char before = 0;
    if (start < st.st_size && (::pread(fd, &before, 1, start - 1) != 1 || before != '\n')) {
      return fail(Status::Corruption("stored position " + std::to_string(start) + " of " + stream.name +
                                     " is not at a line start; was the file replaced?"));
    }
    if (::lseek(fd, start, SEEK_SET) != start) return fail(Status::IoError("cannot seek in " + stream.name + ": " + Errno()));
  }
  auto reader = std::make_unique<LineReader>(
      fd, /*owns_fd=*/true, options.read_buffer_bytes, options.decode.max_record_bytes, start,
      options.follow ? LineReader::AtEnd::kFollow : LineReader::AtEnd::kFinish,
      regular ? LineReader::Wait::kNone : LineReader::Wait::kPoll);
  return std::unique_ptr<FileSource>(new FileSource(std::move(stream), std::move(reader), start));
}

Status FileSource::Poll(std::vector<RawRecord>& out, size_t max_records, int timeout_ms) {
  if (paused_) {
    out.clear();
    return Status::Ok();
  }
  return reader_->Poll(out, max_records, timeout_ms);
}

Status FileSource::Pause(const StreamId&) {
  paused_ = true;
  return Status::Ok();
}

Status FileSource::Resume(const StreamId&) {
  paused_ = false;
  return Status::Ok();
}

StdinSource::StdinSource(const SourceOptions& options, int fd) {
  if (Status s = CheckBuffer(options); !s.ok()) throw std::invalid_argument(s.message());
  reader_ = std::make_unique<LineReader>(fd, /*owns_fd=*/false, options.read_buffer_bytes,
                                         options.decode.max_record_bytes, 0, LineReader::AtEnd::kFinish,
                                         LineReader::Wait::kPoll);
}

StdinSource::~StdinSource() = default;

Status StdinSource::Poll(std::vector<RawRecord>& out, size_t max_records, int timeout_ms) {
  if (paused_) {
    out.clear();
    return Status::Ok();
  }
  return reader_->Poll(out, max_records, timeout_ms);
}

Status StdinSource::Pause(const StreamId&) {
  paused_ = true;
  return Status::Ok();
}

Status StdinSource::Resume(const StreamId&) {
  paused_ = false;
  return Status::Ok();
}

}  // namespace plimsoll::stream
