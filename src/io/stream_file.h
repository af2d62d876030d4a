// A large output file written once, start to end (pass 2's split files and
// rejects.jsonl, the stages' files of a line per record or finding): written
// past the page cache (O_DIRECT) in large aligned blocks where the file system
// allows it. Reading it back afterwards is fine (from the disk, not the cache).
//
// Why: copying gigabytes into the page cache costs the writing thread far
// more than the disk write itself on machines where fresh page-cache pages
// are expensive (virtual machines that hand free memory back to the host;
// docs/performance.md: a 3.7 GB copy took 12-29 s of system time buffered,
// under 1.2 s direct). The bytes on disk are the same either way.
//
// Falls back to ordinary buffered writes, silently and with the same bytes,
// when the file system refuses O_DIRECT at open or on a write (EINVAL: tmpfs
// before Linux 6.6, alignments larger than 4 KiB), and for the file's last
// partial block. Errors name the path, as PosixWritable's do.
// One full block is written on a background thread while the caller fills the
// next; an error surfaces at the next Append or at Close.
// Thread-safety: one thread at a time per file.
#pragma once

#include <memory>
#include <string>

#include "core/file_system.h"

namespace prefsift {

// Creates (or truncates) `path`; `direct` false writes through the page
// cache from the start (the same block-sized writes).
Result<std::unique_ptr<WritableFile>> OpenStreamFile(const std::string& path, bool direct);

}  // namespace prefsift
