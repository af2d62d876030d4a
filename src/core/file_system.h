// The file-system seam's interface: every file a library reads or writes is
// opened through a FileSystem, so tests can run on files held in memory
// (io/memory_file_system.h) and inject read and write faults (disk full, EIO).
// The interface lives in core so that every library, core included, can take
// a FileSystem*; io/file_system.h adds the real, POSIX one (DefaultFileSystem).
//
// Thread-safety: a FileSystem may be shared; each file object is used by one
// thread at a time.
#pragma once

#include <algorithm>
#include <cstdint>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

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
  // A large file written once, start to end (pass 2's outputs, the stages'
  // files of a line per record). The default is OpenWrite; the real file
  // system writes it past the page cache where it can (io/stream_file.h).
  virtual Result<std::unique_ptr<WritableFile>> OpenWriteStream(const std::string& path) { return OpenWrite(path); }
  virtual Status Rename(const std::string& from, const std::string& to) = 0;
  virtual Status MakeDir(const std::string& path) = 0;
  virtual Status RemoveAll(const std::string& path) = 0;
  virtual bool Exists(const std::string& path) = 0;
  // True for an existing folder (after following symbolic links).
  virtual bool IsDirectory(const std::string& path) = 0;
  // The plain names of the entries (files and folders) directly inside the
  // folder `dir`, sorted by byte value; an error when it cannot be listed.
  virtual Result<std::vector<std::string>> List(const std::string& dir) = 0;
};

// The whole content of a file. The error is the file system's (it names the
// path).
Result<std::string> ReadWholeFile(FileSystem* fs, const std::string& path);

}  // namespace prefsift
