// What the two past-the-page-cache files share (io/stream_file.h writes,
// io/read_ahead_file.h reads): O_DIRECT's alignment, their block size, turning
// O_DIRECT off on an open descriptor, and their error wording.
// Thread-safety: pure functions of their arguments.
#pragma once

#include <fcntl.h>

#include <cerrno>
#include <cstddef>
#include <cstring>
#include <string>

namespace prefsift::direct_io {

// O_DIRECT needs the buffer address, the length and the file offset aligned
// to the device's logical block size; 4 KiB covers 512-byte and 4-KiB
// devices (a larger one answers EINVAL and the file goes on buffered).
inline constexpr size_t kAlign = 4096;
// Bytes per read or write: large enough that the disk's per-request cost is
// small, small enough that two buffers a file stay a few MiB.
inline constexpr size_t kBlock = size_t{4} << 20;

// "WHAT PATH: the system's reason for err".
inline std::string Errno(const std::string& what, const std::string& path, int err) {
  return what + " " + path + ": " + std::strerror(err);
}

// Sets (on) or clears O_DIRECT on `fd`; false (errno set) when the system
// refuses.
inline bool SetDirect(int fd, bool on) {
  const int flags = ::fcntl(fd, F_GETFL);
  return flags >= 0 && ::fcntl(fd, F_SETFL, on ? (flags | O_DIRECT) : (flags & ~O_DIRECT)) == 0;
}

}  // namespace prefsift::direct_io
