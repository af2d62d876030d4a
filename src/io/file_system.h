// The file-system seam (interface in core/file_system.h) and the real, POSIX
// file system. Every output byte and every input open goes through a
// FileSystem, so tests can run on files in memory (io/memory_file_system.h)
// and inject read and write faults (disk full, EIO).
//
// Thread-safety: DefaultFileSystem() may be shared by any number of threads.
#pragma once

#include "core/file_system.h"

namespace prefsift {

// The real, POSIX file system. OpenWriteStream writes past the page cache
// (O_DIRECT) where the file system allows it (io/stream_file.h), and OpenRead
// reads a regular file of at least kReadAheadMinBytes past it, with a block
// read ahead (io/read_ahead_file.h).
FileSystem* DefaultFileSystem();
// The same, with either direction through the page cache instead
// (run --buffered-output, --buffered-input).
FileSystem* PosixFileSystemWith(bool direct_writes, bool direct_reads);

}  // namespace prefsift
