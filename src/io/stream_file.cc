#include "io/stream_file.h"

#include <fcntl.h>
#include <unistd.h>

#include <cerrno>
#include <cstdlib>
#include <cstring>

namespace prefsift {
namespace {

// O_DIRECT needs the buffer address, the length and the file offset aligned
// to the device's logical block size; 4 KiB covers 512-byte and 4-KiB
// devices (a larger one answers EINVAL and the file goes on buffered).
constexpr size_t kAlign = 4096;
constexpr size_t kBlock = 4u << 20;  // bytes per write

std::string Errno(const std::string& what, const std::string& path, int err) {
  return what + " " + path + ": " + std::strerror(err);
}

class StreamFile : public WritableFile {
 public:
  StreamFile(int fd, std::string path, bool direct) : fd_(fd), path_(std::move(path)), direct_(direct) {}
  ~StreamFile() override {
    if (fd_ >= 0) ::close(fd_);
    std::free(buf_);
  }

  Status Append(std::string_view bytes) override {
    if (fd_ < 0) return Status::Io("write to closed file " + path_);
    if (!buf_) {
      if (bytes.empty()) return Status::Ok();
      buf_ = static_cast<char*>(std::aligned_alloc(kAlign, kBlock));
      if (!buf_) return Status::Io("cannot write " + path_ + ": out of memory for its write buffer");
    }
    while (!bytes.empty()) {
      const size_t take = std::min(kBlock - used_, bytes.size());
      std::memcpy(buf_ + used_, bytes.data(), take);
      used_ += take;
      bytes.remove_prefix(take);
      if (used_ == kBlock) {
        if (Status s = WriteOut(0, kBlock); !s.ok()) return s;
        used_ = 0;
      }
    }
    return Status::Ok();
  }

  Status Close() override {
    if (fd_ < 0) return Status::Ok();
    Status s = Status::Ok();
    const size_t whole = used_ / kAlign * kAlign;  // written direct; the tail buffered
    if (whole > 0) s = WriteOut(0, whole);
    if (s.ok() && used_ > whole) {
      if (direct_) s = DropDirect();
      if (s.ok()) s = WriteOut(whole, used_);
    }
    used_ = 0;
    const int fd = fd_;
    fd_ = -1;
    if (::close(fd) != 0 && s.ok()) s = Status::Io(Errno("cannot finish writing", path_, errno));
    return s;
  }

 private:
  // Writes buf_[from, to) at the end of the file.
  Status WriteOut(size_t from, size_t to) {
    while (from < to) {
      const ssize_t w = ::write(fd_, buf_ + from, to - from);
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
    const int flags = ::fcntl(fd_, F_GETFL);
    if (flags < 0 || ::fcntl(fd_, F_SETFL, flags & ~O_DIRECT) != 0) {
      return Status::Io(Errno("cannot write", path_, errno));
    }
    direct_ = false;
    return Status::Ok();
  }

  int fd_;
  std::string path_;
  bool direct_;
  char* buf_ = nullptr;  // kBlock bytes, kAlign-aligned; allocated on the first byte
  size_t used_ = 0;
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
