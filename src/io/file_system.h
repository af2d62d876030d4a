// The file-system seam: every output byte and every input open goes through a
// FileSystem, so tests can inject read and write faults (disk full, EIO).
//
// Thread-safety: a FileSystem may be shared; each file object is used by one
// thread at a time.
#pragma once

#include <algorithm>
#include <cstdint>
#include <memory>
#include <string>
#include <string_view>

#include "core/status.h"

namespace prefsift {

class WritableFile {
 public:
  virtual ~WritableFile() = default;
  virtual Status Append(std::string_view bytes) = 0;
  // Flushes and closes; reports any deferred write error (e.g. ENOSPC).
  virtual Status Close() = 0;
};

class ReadableFile {
 public:
  virtual ~ReadableFile() = default;
  // Reads up to n bytes; returns 0 at end of file.
  virtual Result<size_t> Read(char* buf, size_t n) = 0;
  // Moves n bytes forward without returning them (a part of an input,
  // pipeline/parts.h); an error when the file ends first. The default reads
  // and drops them; a file that can seek overrides it.
  virtual Status Skip(uint64_t n) {
    char buf[1 << 14];
    while (n > 0) {
      auto got = Read(buf, static_cast<size_t>(std::min<uint64_t>(n, sizeof buf)));
      if (!got.ok()) return got.status();
      if (got.value() == 0) return Status::Input("the file ends before the part's start");
      n -= got.value();
    }
    return Status::Ok();
  }
};

class FileSystem {
 public:
  virtual ~FileSystem() = default;
  virtual Result<std::unique_ptr<ReadableFile>> OpenRead(const std::string& path) = 0;
  virtual Result<std::unique_ptr<WritableFile>> OpenWrite(const std::string& path) = 0;
  virtual Status Rename(const std::string& from, const std::string& to) = 0;
  virtual Status MakeDir(const std::string& path) = 0;
  virtual Status RemoveAll(const std::string& path) = 0;
  virtual bool Exists(const std::string& path) = 0;
  // True for an existing folder (after following symbolic links).
  virtual bool IsDirectory(const std::string& path) = 0;
};

// The real, POSIX file system.
FileSystem* DefaultFileSystem();

}  // namespace prefsift
