#include "io/file_system.h"

#include <sys/stat.h>

#include <algorithm>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <filesystem>

#include "io/read_ahead_file.h"
#include "io/stream_file.h"

namespace prefsift {
namespace {

std::string Errno(const std::string& what, const std::string& path) {
  return what + " " + path + ": " + std::strerror(errno);
}

class PosixWritable : public WritableFile {
 public:
  PosixWritable(std::FILE* f, std::string path) : f_(f), path_(std::move(path)) {
    std::setvbuf(f_, nullptr, _IOFBF, 1 << 20);
  }
  ~PosixWritable() override {
    if (f_) std::fclose(f_);
  }
  Status Append(std::string_view bytes) override {
    if (!f_) return Status::Io("write to closed file " + path_);
    if (bytes.empty()) return Status::Ok();
    if (std::fwrite(bytes.data(), 1, bytes.size(), f_) != bytes.size()) return Status::Io(Errno("cannot write", path_));
    return Status::Ok();
  }
  Status Close() override {
    if (!f_) return Status::Ok();
    bool bad = std::fflush(f_) != 0 || std::ferror(f_);
    int saved = errno;
    bool close_bad = std::fclose(f_) != 0;
    f_ = nullptr;
    if (bad || close_bad) {
      errno = bad ? saved : errno;
      return Status::Io(Errno("cannot finish writing", path_));
    }
    return Status::Ok();
  }

 private:
  std::FILE* f_;
  std::string path_;
};

class PosixReadable : public ReadableFile {
 public:
  PosixReadable(std::FILE* f, std::string path) : f_(f), path_(std::move(path)) {}
  ~PosixReadable() override { std::fclose(f_); }
  Result<size_t> Read(char* buf, size_t n) override {
    size_t got = std::fread(buf, 1, n, f_);
    if (got < n && std::ferror(f_)) return Status::Input(Errno("cannot read", path_));
    return got;
  }
  Status Skip(uint64_t n) override {
    struct stat st {};
    const off_t at = ftello(f_);
    if (at < 0 || fstat(fileno(f_), &st) != 0 || !S_ISREG(st.st_mode)) return ReadableFile::Skip(n);  // a pipe
    if (static_cast<uint64_t>(st.st_size) - static_cast<uint64_t>(std::min<off_t>(at, st.st_size)) < n) {
      return Status::Input(path_ + " ends before the part's start (the file is " + std::to_string(st.st_size) +
                           " bytes)");
    }
    if (fseeko(f_, at + static_cast<off_t>(n), SEEK_SET) != 0) return Status::Input(Errno("cannot seek in", path_));
    return Status::Ok();
  }

 private:
  std::FILE* f_;
  std::string path_;
};

class PosixFileSystem : public FileSystem {
 public:
  PosixFileSystem(bool direct_streams, bool direct_reads)
      : direct_streams_(direct_streams), direct_reads_(direct_reads) {}
  Result<std::unique_ptr<ReadableFile>> OpenRead(const std::string& path) override {
    struct stat st;
    if (::stat(path.c_str(), &st) != 0) return Status::Input(Errno("cannot open", path));
    if (S_ISDIR(st.st_mode)) return Status::Input("cannot read " + path + ": it is a directory, not a file");
    if (direct_reads_ && S_ISREG(st.st_mode) && static_cast<uint64_t>(st.st_size) >= kReadAheadMinBytes) {
      return OpenReadAheadFile(path, /*direct=*/true);
    }
    std::FILE* f = std::fopen(path.c_str(), "rb");
    if (!f) return Status::Input(Errno("cannot open", path));
    return std::unique_ptr<ReadableFile>(new PosixReadable(f, path));
  }
  Result<std::unique_ptr<WritableFile>> OpenWrite(const std::string& path) override {
    std::FILE* f = std::fopen(path.c_str(), "wb");
    if (!f) return Status::Io(Errno("cannot create", path));
    return std::unique_ptr<WritableFile>(new PosixWritable(f, path));
  }
  Result<std::unique_ptr<WritableFile>> OpenWriteStream(const std::string& path) override {
    return OpenStreamFile(path, direct_streams_);
  }
  Status Rename(const std::string& from, const std::string& to) override {
    if (std::rename(from.c_str(), to.c_str()) != 0) return Status::Io(Errno("cannot rename " + from + " to", to));
    return Status::Ok();
  }
  Status MakeDir(const std::string& path) override {
    std::error_code ec;
    std::filesystem::create_directories(path, ec);
    if (ec) return Status::Io("cannot create folder " + path + ": " + ec.message());
    return Status::Ok();
  }
  Status RemoveAll(const std::string& path) override {
    std::error_code ec;
    std::filesystem::remove_all(path, ec);
    if (ec) return Status::Io("cannot remove " + path + ": " + ec.message());
    return Status::Ok();
  }
  bool Exists(const std::string& path) override {
    std::error_code ec;
    return std::filesystem::exists(path, ec);
  }
  bool IsDirectory(const std::string& path) override {
    std::error_code ec;
    return std::filesystem::is_directory(path, ec);
  }
  Result<std::vector<std::string>> List(const std::string& dir) override {
    std::error_code ec;
    std::vector<std::string> names;
    for (std::filesystem::directory_iterator it(dir, ec), end; !ec && it != end; it.increment(ec)) {
      names.push_back(it->path().filename().string());
    }
    if (ec) return Status::Input("cannot list the folder " + dir + ": " + ec.message());
    std::sort(names.begin(), names.end());
    return names;
  }

 private:
  bool direct_streams_;
  bool direct_reads_;
};

}  // namespace

FileSystem* DefaultFileSystem() { return PosixFileSystemWith(/*direct_writes=*/true, /*direct_reads=*/true); }

FileSystem* PosixFileSystemWith(bool direct_writes, bool direct_reads) {
  static PosixFileSystem both(true, true), writes(true, false), reads(false, true), neither(false, false);
  if (direct_writes) return direct_reads ? &both : &writes;
  return direct_reads ? &reads : &neither;
}

}  // namespace prefsift
