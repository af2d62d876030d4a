// A large input read once, start to end (the preference files of pass 1 and
// pass 2): read past the page cache (O_DIRECT) in large aligned blocks, the
// next block read on a background thread while the caller takes the current
// one. The bytes returned are the file's, whatever the path taken.
//
// Why: on machines where fresh page-cache pages are expensive (virtual
// machines that hand free memory back to the host), reading a file the cache
// does not hold costs the reading thread far more than the disk does
// (docs/performance.md, eighth session: 3.6 GB took 5.1 s of system time
// through the cache, 0.23 s past it), and that time is taken from the workers
// on a small machine. A file the cache already mostly holds (kCachedEnough of
// its pages, asked with mincore at open) is read through the cache instead:
// that costs little, and leaves the disk to pass 2's writes.
//
// Falls back to ordinary reads, silently, when the file system refuses
// O_DIRECT at open or on a read (EINVAL: tmpfs before Linux 6.6, devices with
// a block larger than 4 KiB). Errors name the path.
// Thread-safety: one thread at a time per file (the background read is the
// file's own).
#pragma once

#include <cstdint>
#include <memory>
#include <string>

#include "core/file_system.h"

namespace prefsift {

// Files smaller than this are read through the page cache: rules, plans,
// evaluation sets; neither the block buffers nor the disk's latency pay off.
inline constexpr uint64_t kReadAheadMinBytes = uint64_t{64} << 20;

// The share of a file's pages the page cache must hold for it to be read
// through the cache even when `direct` is asked for.
inline constexpr double kCachedEnough = 0.5;

// Opens the regular file `path` for reading from the start. `direct` false
// reads through the page cache (the same block-sized reads ahead); true reads
// past it unless the cache holds kCachedEnough of the file already.
// REQUIRES: `path` names a regular file.
Result<std::unique_ptr<ReadableFile>> OpenReadAheadFile(const std::string& path, bool direct);

}  // namespace prefsift
