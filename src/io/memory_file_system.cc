#include "io/memory_file_system.h"

#include <algorithm>
#include <string_view>

namespace prefsift {
namespace {

bool Under(const std::string& p, const std::string& prefix) {
  return p.size() >= prefix.size() && p.compare(0, prefix.size(), prefix) == 0;
}

std::string Parent(const std::string& p) {
  size_t slash = p.find_last_of('/');
  if (slash == std::string::npos) return ".";
  return slash == 0 ? "/" : p.substr(0, slash);
}

class Reader : public ReadableFile {
 public:
  explicit Reader(std::string bytes) : bytes_(std::move(bytes)) {}
  Result<size_t> Read(char* buf, size_t n) override {
    size_t k = std::min(n, bytes_.size() - pos_);
    std::copy_n(bytes_.data() + pos_, k, buf);
    pos_ += k;
    return k;
  }

 private:
  std::string bytes_;  // a snapshot: later writes to the path do not change it
  size_t pos_ = 0;
};

}  // namespace

class MemoryFileSystem::Writer : public WritableFile {
 public:
  Writer(MemoryFileSystem* fs, std::string path) : fs_(fs), path_(std::move(path)) {}
  ~Writer() override { (void)Close(); }
  Status Append(std::string_view bytes) override {
    if (closed_) return Status::Io("write to closed file " + path_);
    buf_.append(bytes);
    return Status::Ok();
  }
  Status Close() override {
    if (closed_) return Status::Ok();
    closed_ = true;
    std::lock_guard<std::mutex> lock(fs_->mu_);
    // Removed or moved away while open: the bytes go nowhere, as with an
    // unlinked file.
    if (auto it = fs_->files_.find(path_); it != fs_->files_.end()) it->second = std::move(buf_);
    return Status::Ok();
  }

 private:
  MemoryFileSystem* fs_;
  std::string path_, buf_;
  bool closed_ = false;
};

MemoryFileSystem::MemoryFileSystem() {
  dirs_.insert("/");
  dirs_.insert(".");
}

void MemoryFileSystem::Put(const std::string& path, std::string bytes) {
  std::lock_guard<std::mutex> lock(mu_);
  MakeDirLocked(Parent(path));
  files_[path] = std::move(bytes);
}

bool MemoryFileSystem::Get(const std::string& path, std::string* bytes) const {
  std::lock_guard<std::mutex> lock(mu_);
  auto it = files_.find(path);
  if (it == files_.end()) return false;
  *bytes = it->second;
  return true;
}

std::vector<std::string> MemoryFileSystem::ListFiles(const std::string& dir) const {
  std::lock_guard<std::mutex> lock(mu_);
  std::vector<std::string> out;
  const std::string prefix = dir == "/" ? dir : dir + "/";
  for (auto it = files_.lower_bound(prefix); it != files_.end() && Under(it->first, prefix); ++it) {
    std::string rest = it->first.substr(prefix.size());
    if (rest.find('/') == std::string::npos) out.push_back(rest);
  }
  return out;
}

std::vector<std::string> MemoryFileSystem::AllPaths() const {
  std::lock_guard<std::mutex> lock(mu_);
  std::vector<std::string> out;
  for (const auto& [p, _] : files_) out.push_back(p);
  for (const auto& d : dirs_) out.push_back(d);
  std::sort(out.begin(), out.end());
  return out;
}

void MemoryFileSystem::Clear() {
  std::lock_guard<std::mutex> lock(mu_);
  files_.clear();
  dirs_.clear();
  dirs_.insert("/");
  dirs_.insert(".");
}

Result<std::unique_ptr<ReadableFile>> MemoryFileSystem::OpenRead(const std::string& path) {
  std::lock_guard<std::mutex> lock(mu_);
  auto it = files_.find(path);
  if (it == files_.end()) {
    if (dirs_.count(path)) return Status::Input("cannot read " + path + ": it is a directory, not a file");
    return Status::Input("cannot open " + path + ": No such file or directory");
  }
  return std::unique_ptr<ReadableFile>(new Reader(it->second));
}

Result<std::unique_ptr<WritableFile>> MemoryFileSystem::OpenWrite(const std::string& path) {
  std::lock_guard<std::mutex> lock(mu_);
  if (!dirs_.count(Parent(path))) return Status::Io("cannot create " + path + ": No such file or directory");
  if (dirs_.count(path)) return Status::Io("cannot create " + path + ": Is a directory");
  files_[path];  // created (empty) at open, as fopen("wb") does
  return std::unique_ptr<WritableFile>(new Writer(this, path));
}

Status MemoryFileSystem::Rename(const std::string& from, const std::string& to) {
  std::lock_guard<std::mutex> lock(mu_);
  if (!dirs_.count(Parent(to))) return Status::Io("cannot rename to " + to + ": No such file or directory");
  if (auto f = files_.find(from); f != files_.end()) {
    if (dirs_.count(to)) return Status::Io("cannot rename " + from + " over the folder " + to);
    std::string bytes = std::move(f->second);
    files_.erase(f);
    files_[to] = std::move(bytes);
    return Status::Ok();
  }
  if (!dirs_.count(from)) return Status::Io("cannot rename " + from + ": No such file or directory");
  if (files_.count(to)) return Status::Io("cannot rename the folder " + from + " over the file " + to);
  if (dirs_.count(to)) {  // POSIX: only an empty folder may be replaced
    if (HasChildren(to)) return Status::Io("cannot rename " + from + " to " + to + ": Directory not empty");
    dirs_.erase(to);
  }
  MoveTree(from, to);
  return Status::Ok();
}

Status MemoryFileSystem::MakeDir(const std::string& path) {
  std::lock_guard<std::mutex> lock(mu_);
  for (std::string p = path; !p.empty() && p != "/" && p != "."; p = Parent(p)) {
    if (files_.count(p)) return Status::Io("cannot create the folder " + path + ": File exists");
  }
  MakeDirLocked(path);
  return Status::Ok();
}

Status MemoryFileSystem::RemoveAll(const std::string& path) {
  std::lock_guard<std::mutex> lock(mu_);
  files_.erase(path);
  if (path != "/" && path != ".") dirs_.erase(path);
  EraseUnder(path == "/" ? path : path + "/");
  return Status::Ok();
}

bool MemoryFileSystem::Exists(const std::string& path) {
  std::lock_guard<std::mutex> lock(mu_);
  return files_.count(path) || dirs_.count(path);
}

bool MemoryFileSystem::IsDirectory(const std::string& path) {
  std::lock_guard<std::mutex> lock(mu_);
  return dirs_.count(path) > 0;
}

Result<std::vector<std::string>> MemoryFileSystem::List(const std::string& dir) {
  std::lock_guard<std::mutex> lock(mu_);
  if (!dirs_.count(dir)) return Status::Input("cannot list the folder " + dir + ": No such file or directory");
  const std::string prefix = dir == "/" ? dir : dir + "/";
  std::set<std::string> names;  // sorted, and a folder named once
  auto add = [&](const std::string& p) {
    std::string rest = p.substr(prefix.size());
    if (!rest.empty() && rest.find('/') == std::string::npos) names.insert(rest);
  };
  for (auto it = files_.lower_bound(prefix); it != files_.end() && Under(it->first, prefix); ++it) add(it->first);
  for (auto it = dirs_.lower_bound(prefix); it != dirs_.end() && Under(*it, prefix); ++it) add(*it);
  return std::vector<std::string>(names.begin(), names.end());
}

// create_directories: the folder and every missing parent.
void MemoryFileSystem::MakeDirLocked(const std::string& path) {
  for (std::string p = path; !p.empty() && !dirs_.count(p); p = Parent(p)) dirs_.insert(p);
}

bool MemoryFileSystem::HasChildren(const std::string& dir) const {
  const std::string prefix = dir + "/";
  auto f = files_.lower_bound(prefix);
  auto d = dirs_.lower_bound(prefix);
  return (f != files_.end() && Under(f->first, prefix)) || (d != dirs_.end() && Under(*d, prefix));
}

void MemoryFileSystem::EraseUnder(const std::string& prefix) {
  for (auto it = files_.lower_bound(prefix); it != files_.end() && Under(it->first, prefix);) it = files_.erase(it);
  for (auto it = dirs_.lower_bound(prefix); it != dirs_.end() && Under(*it, prefix);) {
    it = *it == "/" ? std::next(it) : dirs_.erase(it);
  }
}

void MemoryFileSystem::MoveTree(const std::string& from, const std::string& to) {
  const std::string prefix = from + "/";
  std::map<std::string, std::string> moved_files;
  std::set<std::string> moved_dirs;
  for (auto it = files_.lower_bound(prefix); it != files_.end() && Under(it->first, prefix); ++it) {
    moved_files[to + it->first.substr(from.size())] = std::move(it->second);
  }
  for (auto it = dirs_.lower_bound(prefix); it != dirs_.end() && Under(*it, prefix); ++it) {
    moved_dirs.insert(to + it->substr(from.size()));
  }
  EraseUnder(prefix);
  dirs_.erase(from);
  dirs_.insert(to);
  for (auto& [p, b] : moved_files) files_[p] = std::move(b);
  dirs_.insert(moved_dirs.begin(), moved_dirs.end());
}

}  // namespace prefsift
