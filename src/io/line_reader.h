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

class LineReader {
 public:
  enum class Next { kLine, kTooLong, kEnd };

  static Result<std::unique_ptr<LineReader>> Open(FileSystem* fs, const std::string& path, size_t max_line_bytes);
  virtual ~LineReader() = default;

  // On kLine, *line is valid until the next call. *line_no is 1-based.
  virtual Result<Next> Read(std::string_view* line, uint64_t* line_no) = 0;
  virtual Compression compression() const = 0;
  // Bytes of (decompressed) input consumed so far, for progress lines.
  virtual uint64_t bytes_read() const = 0;
};

}  // namespace prefsift
