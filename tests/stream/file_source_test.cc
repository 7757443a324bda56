#include "plimsoll/stream/file_source.h"

#include <fcntl.h>
#include <unistd.h>

#include <cstdio>
#include <filesystem>
#include <fstream>
#include <map>
#include <string>
#include <vector>

#include <catch2/catch.hpp>

#include "plimsoll/stream/decode.h"

namespace plimsoll::stream {
namespace {

// A file under the build tree, removed at scope exit.
class TempFile {
 public:
  explicit TempFile(std::string_view content, std::string name = "") {
    static int counter = 0;
    path_ = std::string(PLIMSOLL_BINARY_DIR) + "/stream_test_" + std::to_string(::getpid()) + "_" +
            std::to_string(counter++) + name + ".txt";
    std::ofstream(path_, std::ios::binary) << content;
  }
  ~TempFile() { std::remove(path_.c_str()); }
  const std::string& path() const { return path_; }

 private:
  std::string path_;
};

struct Line {
  std::string payload;
  int64_t offset;
  int64_t next_offset;
  friend bool operator==(const Line&, const Line&) = default;
};

std::ostream& operator<<(std::ostream& os, const Line& l) {
  return os << "{" << l.payload << " @" << l.offset << ".." << l.next_offset << "}";
}

// Reads everything a source returns until Aborted, copying the payloads.
std::vector<Line> Drain(RecordSource& src, size_t batch = 3) {
  std::vector<Line> lines;
  std::vector<RawRecord> out;
  for (int polls = 0; polls < 100000; ++polls) {
    Status s = src.Poll(out, batch, 10);
    for (const RawRecord& r : out) lines.push_back({std::string(r.payload), r.offset, r.next_offset});
    if (s.code() == StatusCode::kAborted) return lines;
    REQUIRE(s.ok());
    REQUIRE(out.size() <= batch);
  }
  FAIL("source never ended");
  return lines;
}

SourceOptions FileOptions(const std::string& path) {
  SourceOptions o;
  o.kind = SourceKind::kFile;
  o.path = path;
  return o;
}

std::unique_ptr<FileSource> OpenAt(const SourceOptions& o, std::optional<int64_t> stored) {
  Result<std::unique_ptr<FileSource>> src = FileSource::Open(o, [&](const StreamId&) { return stored; });
  INFO(src.status().ToString());
  REQUIRE(src.ok());
  return std::move(*src);
}

}  // namespace

TEST_CASE("file source returns lines with byte offsets", "[stream]") {
  TempFile f("a,1,1\nbb,2,2\nccc,3,3\n");
  auto src = OpenAt(FileOptions(f.path()), std::nullopt);
  CHECK(Drain(*src) == std::vector<Line>{{"a,1,1", 0, 6}, {"bb,2,2", 6, 13}, {"ccc,3,3", 13, 21}});
  REQUIRE(src->Streams().size() == 1);
  CHECK(src->Streams()[0].name == "file:" + std::filesystem::absolute(f.path()).lexically_normal().string());
}

TEST_CASE("file source returns a final line without newline", "[stream]") {
  TempFile f("a,1,1\nb,2,2");
  auto src = OpenAt(FileOptions(f.path()), std::nullopt);
  CHECK(Drain(*src) == std::vector<Line>{{"a,1,1", 0, 6}, {"b,2,2", 6, 11}});
}

TEST_CASE("file source strips CR of CRLF lines and skips blank lines", "[stream]") {
  TempFile f("a,1,1\r\n\r\n\nb,2,2\r\n");
  auto src = OpenAt(FileOptions(f.path()), std::nullopt);
  CHECK(Drain(*src) == std::vector<Line>{{"a,1,1", 0, 7}, {"b,2,2", 10, 17}});
}

TEST_CASE("file source resumes from a stored offset with exactly the remaining records", "[stream]") {
  std::string content;
  for (int i = 0; i < 500; ++i) content += "series-" + std::to_string(i % 13) + ",1772352930," + std::to_string(i) + "\n";
  TempFile f(content);
  SourceOptions o = FileOptions(f.path());
  o.read_buffer_bytes = 70000;  // several refills
  const std::vector<Line> all = Drain(*OpenAt(o, std::nullopt), 7);
  REQUIRE(all.size() == 500);
  for (size_t cut : {size_t{1}, size_t{137}, size_t{499}}) {
    auto src = OpenAt(o, all[cut - 1].next_offset);
    CHECK(src->start_offset() == all[cut - 1].next_offset);
    const std::vector<Line> rest = Drain(*src, 11);
    CHECK(rest == std::vector<Line>(all.begin() + static_cast<long>(cut), all.end()));
  }
  // Resuming at the end yields nothing.
  CHECK(Drain(*OpenAt(o, all.back().next_offset)).empty());
}

TEST_CASE("file source resumes after a final line without newline", "[stream]") {
  TempFile f("a,1,1\nb,2,2");
  CHECK(Drain(*OpenAt(FileOptions(f.path()), 11)).empty());
}

TEST_CASE("file source refuses a stored offset beyond the end", "[stream]") {
  TempFile f("a,1,1\n");
  Result<std::unique_ptr<FileSource>> src =
      FileSource::Open(FileOptions(f.path()), [](const StreamId&) { return std::optional<int64_t>(100); });
  REQUIRE_FALSE(src.ok());
  CHECK(src.status().code() == StatusCode::kCorruption);
  CHECK_THAT(src.status().message(), Catch::Contains("stored position 100") && Catch::Contains("beyond its end (6 bytes)"));
}

TEST_CASE("file source refuses a stored offset inside a line", "[stream]") {
  TempFile f("a,1,1\nb,2,2\n");
  Result<std::unique_ptr<FileSource>> src =
      FileSource::Open(FileOptions(f.path()), [](const StreamId&) { return std::optional<int64_t>(3); });
  REQUIRE_FALSE(src.ok());
  CHECK(src.status().code() == StatusCode::kCorruption);
  CHECK_THAT(src.status().message(), Catch::Contains("is not at a line start"));
}

TEST_CASE("file source reports a missing file", "[stream]") {
  Result<std::unique_ptr<FileSource>> src = FileSource::Open(FileOptions("/nonexistent/x.csv"), {});
  REQUIRE_FALSE(src.ok());
  CHECK(src.status().code() == StatusCode::kIoError);
  CHECK_THAT(src.status().message(), Catch::StartsWith("cannot open '/nonexistent/x.csv'"));
}

TEST_CASE("file source refuses a read buffer not above the record limit", "[stream]") {
  TempFile f("a,1,1\n");
  SourceOptions o = FileOptions(f.path());
  o.read_buffer_bytes = o.decode.max_record_bytes;
  CHECK(FileSource::Open(o, {}).status().code() == StatusCode::kInvalidArgument);
}

TEST_CASE("lines longer than the read buffer are truncated and skipped whole", "[stream]") {
  SourceOptions o;
  o.decode.max_record_bytes = 100;
  o.read_buffer_bytes = 4096;  // the reader keeps at least max_record_bytes + 4096
  const std::string huge(20000, 'x');
  TempFile f("a,1,1\n" + huge + "\nb,2,2\n" + huge);
  o.path = f.path();
  const std::vector<Line> lines = Drain(*OpenAt(o, std::nullopt));
  REQUIRE(lines.size() == 4);
  CHECK(lines[0] == Line{"a,1,1", 0, 6});
  CHECK(lines[1] == Line{std::string(101, 'x'), 6, 20007});
  CHECK(lines[2] == Line{"b,2,2", 20007, 20013});
  CHECK(lines[3] == Line{std::string(101, 'x'), 20013, 40013});
  RecordDecoder d(o.decode);
  DecodedRecord r;
  CHECK(d.Decode({}, lines[1].payload, -1, r).message() == "record of 101 bytes exceeds max_record_bytes 100");
}

TEST_CASE("file source payloads can be decoded in place", "[stream]") {
  TempFile f("{\"series\":\"a\",\"time\":1772352930,\"value\":1}\nb,1772352930,2\n{\"series\":\"c\",\"time\":1772352930,\"value\":3}");
  auto src = OpenAt(FileOptions(f.path()), std::nullopt);
  RecordDecoder d;
  std::vector<RawRecord> out;
  std::vector<double> values;
  while (true) {
    Status s = src->Poll(out, 100, 0);
    for (const RawRecord& r : out) {
      DecodedRecord rec;
      REQUIRE(d.DecodePadded(r.key, r.payload, r.timestamp_ms, rec).ok());
      values.push_back(rec.value);
    }
    if (!s.ok()) break;
  }
  CHECK(values == std::vector<double>{1, 2, 3});
}

TEST_CASE("paused file source returns nothing until resumed", "[stream]") {
  TempFile f("a,1,1\n");
  auto src = OpenAt(FileOptions(f.path()), std::nullopt);
  std::vector<RawRecord> out;
  REQUIRE(src->Pause(src->Streams()[0]).ok());
  REQUIRE(src->Poll(out, 10, 0).ok());
  CHECK(out.empty());
  REQUIRE(src->Resume(src->Streams()[0]).ok());
  CHECK(Drain(*src).size() == 1);
}

TEST_CASE("followed file source picks up appended lines", "[stream]") {
  TempFile f("a,1,1\npartial");
  SourceOptions o = FileOptions(f.path());
  o.follow = true;
  auto src = OpenAt(o, std::nullopt);
  std::vector<RawRecord> out;
  REQUIRE(src->Poll(out, 10, 0).ok());
  REQUIRE(out.size() == 1);
  CHECK(out[0].payload == "a,1,1");
  REQUIRE(src->Poll(out, 10, 0).ok());
  CHECK(out.empty());  // an unterminated line may still be being written
  std::ofstream(f.path(), std::ios::app) << ",2,2\nb,3,3\n";
  std::vector<std::string> got;
  for (int i = 0; i < 10 && got.size() < 2; ++i) {
    REQUIRE(src->Poll(out, 10, 0).ok());
    for (const RawRecord& r : out) got.emplace_back(r.payload);
  }
  CHECK(got == std::vector<std::string>{"partial,2,2", "b,3,3"});
}

TEST_CASE("stdin source reads a pipe and counts bytes since start", "[stream]") {
  int fds[2];
  REQUIRE(::pipe(fds) == 0);
  SourceOptions o;
  StdinSource src(o, fds[0]);
  CHECK(src.Streams()[0].name == "stdin");
  std::vector<RawRecord> out;
  REQUIRE(src.Poll(out, 10, 0).ok());  // nothing written yet: times out empty
  CHECK(out.empty());
  const std::string first = "a,1,1\nb,2";
  REQUIRE(::write(fds[1], first.data(), first.size()) == static_cast<ssize_t>(first.size()));
  REQUIRE(src.Poll(out, 10, 100).ok());
  REQUIRE(out.size() == 1);
  CHECK(out[0].payload == "a,1,1");
  const std::string second = ",2\r\nc,3,3";
  REQUIRE(::write(fds[1], second.data(), second.size()) == static_cast<ssize_t>(second.size()));
  ::close(fds[1]);
  std::vector<Line> rest = Drain(src);
  ::close(fds[0]);
  CHECK(rest == std::vector<Line>{{"b,2,2", 6, 13}, {"c,3,3", 13, 18}});
}

TEST_CASE("source batches never exceed max_records", "[stream]") {
  std::string content;
  for (int i = 0; i < 50; ++i) content += "s,1," + std::to_string(i) + "\n";
  TempFile f(content);
  auto src = OpenAt(FileOptions(f.path()), std::nullopt);
  CHECK(Drain(*src, 1).size() == 50);  // Drain checks every batch size
}

}  // namespace plimsoll::stream
