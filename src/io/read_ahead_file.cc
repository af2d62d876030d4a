#include "io/read_ahead_file.h"

#include <fcntl.h>
#include <sys/mman.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstdlib>
#include <cstring>
#include <future>
#include <vector>

#include "io/direct_io.h"

namespace prefsift {
namespace {

using direct_io::Errno;
using direct_io::kAlign;
using direct_io::kBlock;

// Two buffers take turns: the caller copies out of the current block while
// the next one is read on a background thread.
class ReadAheadFile : public ReadableFile {
 public:
  ReadAheadFile(int fd, std::string path, bool direct, uint64_t size)
      : fd_(fd), path_(std::move(path)), direct_(direct), size_(size) {}
  ~ReadAheadFile() override {
    if (in_flight_.valid()) (void)in_flight_.get();
    ::close(fd_);
    std::free(bufs_[0]);
    std::free(bufs_[1]);
  }

  // Fills buf with up to n bytes, fewer only at the end of the file (as fread).
  Result<size_t> Read(char* buf, size_t n) override {
    if (!failed_.ok()) return failed_;
    size_t done = 0;
    while (done < n) {
      if (pos_ == len_) {
        if (at_end_) break;
        if (Status s = NextBlock(); !s.ok()) return s;
        continue;
      }
      const size_t take = std::min(n - done, len_ - pos_);
      std::memcpy(buf + done, bufs_[cur_] + pos_, take);
      pos_ += take;
      done += take;
    }
    return done;
  }

  Status Skip(uint64_t n) override {
    if (!failed_.ok()) return failed_;
    if (n <= len_ - pos_) {
      pos_ += n;
      return Status::Ok();
    }
    const uint64_t target = cur_offset_ + pos_ + n;
    if (target > size_) {
      return Status::Input(path_ + " ends before the part's start (the file is " + std::to_string(size_) +
                           " bytes)");
    }
    if (in_flight_.valid()) (void)in_flight_.get();  // a block this skip passes over (or an error there)
    next_ = target / kAlign * kAlign;
    skip_ = static_cast<size_t>(target - next_);
    cur_offset_ = target;
    pos_ = len_ = 0;
    at_end_ = false;
    return Status::Ok();
  }

 private:
  // Makes the block at next_ current (the background read's, or read now),
  // then starts reading the one after it.
  Status NextBlock() {
    if (!bufs_[0]) {
      for (char*& b : bufs_) {
        b = static_cast<char*>(std::aligned_alloc(kAlign, kBlock));
        if (!b) return Fail(Status::Input("cannot read " + path_ + ": out of memory for its read buffers"));
      }
    }
    const int other = cur_ ^ 1;
    Result<size_t> got = in_flight_.valid() ? in_flight_.get() : ReadBlock(bufs_[other], next_);
    if (!got.ok()) return Fail(got.status());
    cur_ = other;
    cur_offset_ = next_;
    len_ = got.value();
    pos_ = std::min(skip_, len_);
    skip_ = 0;
    next_ += len_;
    at_end_ = len_ < kBlock;  // ReadBlock fills the block unless the file ends
    if (!at_end_) {
      in_flight_ = std::async(std::launch::async, [this, buf = bufs_[cur_ ^ 1], at = next_] {
        return ReadBlock(buf, at);
      });
    }
    return Status::Ok();
  }

  // Reads kBlock bytes at `offset` into buf, fewer only at the end of the
  // file. One read at a time (NextBlock waits for the one in flight).
  Result<size_t> ReadBlock(char* buf, uint64_t offset) {
    size_t have = 0;
    while (have < kBlock) {
      const ssize_t r = ::pread(fd_, buf + have, kBlock - have, static_cast<off_t>(offset + have));
      if (r < 0) {
        const int err = errno;
        if (err == EINTR) continue;
        if (err == EINVAL && direct_) {  // an alignment the device refuses (or an unaligned tail): go on buffered
          if (Status s = DropDirect(); !s.ok()) return s;
          continue;
        }
        return Status::Input(Errno("cannot read", path_, err));
      }
      if (r == 0) break;
      have += static_cast<size_t>(r);
    }
    return have;
  }

  Status DropDirect() {
    if (!direct_io::SetDirect(fd_, false)) return Status::Input(Errno("cannot read", path_, errno));
    direct_ = false;
    return Status::Ok();
  }

  Status Fail(Status s) {
    failed_ = s;
    return s;
  }

  int fd_;
  std::string path_;
  bool direct_;                         // touched by one read at a time
  uint64_t size_;                       // at open, for Skip's message
  char* bufs_[2] = {nullptr, nullptr};  // kBlock bytes each, kAlign-aligned; allocated on the first read
  int cur_ = 0;                         // the buffer being taken from
  uint64_t cur_offset_ = 0;             // file offset of the current buffer's pos_ 0 (after a Skip: of the target)
  size_t pos_ = 0, len_ = 0;            // taken so far, and held, in the current buffer
  uint64_t next_ = 0;                   // file offset of the next block (aligned unless the file went buffered)
  size_t skip_ = 0;                     // bytes of the next block before a Skip's target
  bool at_end_ = false;                 // the current block is the file's last
  std::future<Result<size_t>> in_flight_;
  Status failed_ = Status::Ok();
};

// Share of the file's pages the page cache holds now (mincore over a
// read-only mapping, 1 GiB at a time; nothing is read). 0 when it cannot
// tell.
double CachedShare(int fd, uint64_t size) {
  if (size == 0) return 0;
  const auto page = static_cast<uint64_t>(::sysconf(_SC_PAGESIZE));
  constexpr uint64_t kWindow = uint64_t{1} << 30;
  std::vector<unsigned char> in_core;
  uint64_t resident = 0, pages = 0;
  for (uint64_t at = 0; at < size; at += kWindow) {
    const auto len = static_cast<size_t>(std::min(kWindow, size - at));
    void* map = ::mmap(nullptr, len, PROT_READ, MAP_SHARED, fd, static_cast<off_t>(at));
    if (map == MAP_FAILED) return 0;
    in_core.resize((len + page - 1) / page);
    const bool ok = ::mincore(map, len, in_core.data()) == 0;
    ::munmap(map, len);
    if (!ok) return 0;
    for (unsigned char c : in_core) resident += c & 1u;
    pages += in_core.size();
  }
  return static_cast<double>(resident) / static_cast<double>(pages);
}

}  // namespace

Result<std::unique_ptr<ReadableFile>> OpenReadAheadFile(const std::string& path, bool direct) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return Status::Input(Errno("cannot open", path, errno));
  struct stat st {};
  if (::fstat(fd, &st) != 0) {
    const int err = errno;
    ::close(fd);
    return Status::Input(Errno("cannot open", path, err));
  }
  // A file the cache mostly holds already costs little to read through it,
  // and reading it from the disk again would take the disk from pass 2's
  // writes; one it does not hold goes past the cache.
  if (direct && CachedShare(fd, static_cast<uint64_t>(st.st_size)) >= kCachedEnough) direct = false;
  if (direct) {
    if (!direct_io::SetDirect(fd, true)) direct = false;  // the file system has no O_DIRECT
  }
  return std::unique_ptr<ReadableFile>(new ReadAheadFile(fd, path, direct, static_cast<uint64_t>(st.st_size)));
}

}  // namespace prefsift
