// The SHA-256 of a file's bytes, read through the file-system seam
// (core/file_system.h), for provenance: the inputs and outputs of a run, the
// inputs and evaluation sets of a store batch.
// Thread-safety: a pure function of the file; may run on many threads at once.
#pragma once

#include <cstdint>
#include <string>

#include "core/file_system.h"
#include "core/status.h"

namespace prefsift {

struct FileDigest {
  std::string sha256;  // lower-case hex, 64 characters
  uint64_t bytes = 0;  // the file's size
};

// Reads the whole file in 1 MiB pieces. The error is the file system's (it
// names the path).
Result<FileDigest> DigestFile(FileSystem* fs, const std::string& path);

}  // namespace prefsift
