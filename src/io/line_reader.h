// LineReader: streams the lines of a JSONL file, plain, gzip or zstd
// (recognised by their magic bytes, not the file name).
//
// Lines end at LF; a CR before the LF is removed; a UTF-8 byte-order mark at
// the start of the file is removed; a last line without LF is still a line.
// A line longer than max_line_bytes is skipped without being buffered and
// reported as kTooLong. Memory: one read buffer plus the longest line.
// Thread-safety: one reader per thread.
#pragma once

#include <cstdint>
#include <memory>
#include <string>
#include <string_view>

#include "core/status.h"
#include "io/file_system.h"

namespace prefsift {

enum class Compression { kNone, kGzip, kZstd };

// A byte range of an uncompressed file (a part, pipeline/parts.h): the lines
// that start at or after `begin` and before `end`, numbered from `first_line`.
// `begin` must be 0 or just after a LF. A compressed file is read whole only.
struct LineRange {
  uint64_t begin = 0;
  uint64_t end = UINT64_MAX;  // exclusive; UINT64_MAX = to the end of the file
  uint64_t first_line = 1;
  bool whole() const { return begin == 0 && end == UINT64_MAX && first_line == 1; }
};

class LineReader {
 public:
  enum class Next { kLine, kTooLong, kEnd };

  static Result<std::unique_ptr<LineReader>> Open(FileSystem* fs, const std::string& path, size_t max_line_bytes);
  static Result<std::unique_ptr<LineReader>> Open(FileSystem* fs, const std::string& path, size_t max_line_bytes,
                                                  const LineRange& range);
  virtual ~LineReader() = default;

  // On kLine, *line is valid until the next call. *line_no is 1-based.
  virtual Result<Next> Read(std::string_view* line, uint64_t* line_no) = 0;
  virtual Compression compression() const = 0;
  // Bytes of (decompressed) input consumed so far, for progress lines.
  virtual uint64_t bytes_read() const = 0;
  // After kEnd: true when the file has no byte after the range (always true
  // for a whole file).
  virtual bool at_file_end() const = 0;
};

}  // namespace prefsift
