#include "io/stream_file.h"

#include <fcntl.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstdlib>
#include <cstring>
#include <future>

#include "io/direct_io.h"

namespace prefsift {
namespace {

using direct_io::Errno;
using direct_io::kAlign;
using direct_io::kBlock;

// Two buffers take turns: while one full block is written on a background
// thread (the disk's time, with O_DIRECT), the caller fills the other, so the
// writer's own work (the output digest, the copy) overlaps the disk's.
class StreamFile : public WritableFile {
 public:
  StreamFile(int fd, std::string path, bool direct) : fd_(fd), path_(std::move(path)), direct_(direct) {}
  ~StreamFile() override {
    (void)Wait();
    if (fd_ >= 0) ::close(fd_);
    std::free(bufs_[0]);
    std::free(bufs_[1]);
  }

  Status Append(std::string_view bytes) override {
    if (fd_ < 0) return Status::Io("write to closed file " + path_);
    if (!failed_.ok()) return failed_;
    if (!bufs_[0]) {
      if (bytes.empty()) return Status::Ok();
      for (char*& b : bufs_) {
        b = static_cast<char*>(std::aligned_alloc(kAlign, kBlock));
        if (!b) return Status::Io("cannot write " + path_ + ": out of memory for its write buffers");
      }
    }
    while (!bytes.empty()) {
      const size_t take = std::min(kBlock - used_, bytes.size());
      std::memcpy(bufs_[cur_] + used_, bytes.data(), take);
      used_ += take;
      bytes.remove_prefix(take);
      if (used_ == kBlock) {
        if (Status s = Submit(); !s.ok()) return s;
      }
    }
    return Status::Ok();
  }

  Status Close() override {
    if (fd_ < 0) return Status::Ok();
    Status s = Wait();
    const size_t whole = used_ / kAlign * kAlign;  // written direct; the tail buffered
    if (s.ok() && whole > 0) s = WriteOut(bufs_[cur_], 0, whole);
    if (s.ok() && used_ > whole) {
      if (direct_) s = DropDirect();
      if (s.ok()) s = WriteOut(bufs_[cur_], whole, used_);
    }
    used_ = 0;
    const int fd = fd_;
    fd_ = -1;
    if (::close(fd) != 0 && s.ok()) s = Status::Io(Errno("cannot finish writing", path_, errno));
    return s;
  }

 private:
  // Hands the full current buffer to a background write (after the previous
  // one has finished) and makes the other buffer current.
  Status Submit() {
    if (Status s = Wait(); !s.ok()) return s;
    char* full = bufs_[cur_];
    in_flight_ = std::async(std::launch::async, [this, full] { return WriteOut(full, 0, kBlock); });
    cur_ ^= 1;
    used_ = 0;
    return Status::Ok();
  }
  // The background write's outcome; its first error is kept and returned by
  // every later call, so nothing is written after a failed write.
  Status Wait() {
    if (in_flight_.valid()) {
      Status s = in_flight_.get();
      if (!s.ok() && failed_.ok()) failed_ = std::move(s);
    }
    return failed_;
  }

  // Writes buf[from, to) at the end of the file (one write at a time: the
  // caller waits for the one in flight first).
  Status WriteOut(const char* buf, size_t from, size_t to) {
    while (from < to) {
      const ssize_t w = ::write(fd_, buf + from, to - from);
      if (w < 0) {
        const int err = errno;
        if (err == EINTR) continue;
        if (err == EINVAL && direct_) {  // an alignment the device refuses: go on buffered
          if (Status s = DropDirect(); !s.ok()) return s;
          continue;
        }
        return Status::Io(Errno("cannot write", path_, err));
      }
      if (w == 0) return Status::Io("cannot write " + path_ + ": the file system accepted no byte");
      from += static_cast<size_t>(w);
      // A short write leaves the file offset unaligned: the rest goes buffered.
      if (direct_ && from < to && static_cast<size_t>(w) % kAlign != 0) {
        if (Status s = DropDirect(); !s.ok()) return s;
      }
    }
    return Status::Ok();
  }

  Status DropDirect() {
    if (!direct_io::SetDirect(fd_, false)) return Status::Io(Errno("cannot write", path_, errno));
    direct_ = false;
    return Status::Ok();
  }

  int fd_;
  std::string path_;
  bool direct_;                        // touched by one write at a time
  char* bufs_[2] = {nullptr, nullptr};  // kBlock bytes each, kAlign-aligned; allocated on the first byte
  int cur_ = 0;                         // the buffer being filled
  size_t used_ = 0;
  std::future<Status> in_flight_;
  Status failed_ = Status::Ok();
};

}  // namespace

Result<std::unique_ptr<WritableFile>> OpenStreamFile(const std::string& path, bool direct) {
  constexpr int kFlags = O_WRONLY | O_CREAT | O_TRUNC | O_CLOEXEC;
  int fd = -1;
  if (direct) {
    fd = ::open(path.c_str(), kFlags | O_DIRECT, 0666);
    if (fd < 0 && errno == EINVAL) direct = false;  // the file system has no O_DIRECT
  }
  if (fd < 0) fd = ::open(path.c_str(), kFlags, 0666);
  if (fd < 0) return Status::Io(Errno("cannot create", path, errno));
  return std::unique_ptr<WritableFile>(new StreamFile(fd, path, direct));
}

}  // namespace prefsift
