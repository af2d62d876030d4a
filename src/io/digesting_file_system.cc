// Digests while reading; see digesting_file_system.h.
#include "io/digesting_file_system.h"

#include "core/beside.h"
#include "core/sha256.h"

namespace prefsift {

// The SHA-256 and size of the bytes seen so far, recorded with the owner
// for one path when the file is done.
class RunningDigest {
 public:
  RunningDigest(DigestingFileSystem* owner, std::string path) : owner_(owner), path_(std::move(path)) {}
  void Add(std::string_view bytes) {
    hash_.Update(bytes);
    bytes_ += bytes.size();
  }
  void Record() { owner_->Record(path_, FileDigest{hash_.HexDigest(), bytes_}); }

 private:
  DigestingFileSystem* owner_;
  std::string path_;
  Sha256 hash_;
  uint64_t bytes_ = 0;
};

class DigestingFile : public ReadableFile {
 public:
  DigestingFile(std::unique_ptr<ReadableFile> base, DigestingFileSystem* owner, std::string path)
      : base_(std::move(base)), digest_(owner, std::move(path)) {}

  Result<size_t> Read(char* buf, size_t n) override {
    auto got = base_->Read(buf, n);
    if (!got.ok() || done_) return got;
    if (got.value() == 0) {
      done_ = true;
      digest_.Record();
      return got;
    }
    digest_.Add(std::string_view(buf, got.value()));
    return got;
  }

 private:
  std::unique_ptr<ReadableFile> base_;
  RunningDigest digest_;
  bool done_ = false;
};

// Appends of at least this many bytes are hashed beside the write; smaller
// ones (the report's and the datasheet's many small pieces) are not worth a
// thread.
constexpr size_t kHashAside = size_t{1} << 20;

class DigestingWritableFile : public WritableFile {
 public:
  DigestingWritableFile(std::unique_ptr<WritableFile> base, DigestingFileSystem* owner, std::string path)
      : base_(std::move(base)), digest_(owner, std::move(path)) {}

  // A large piece is hashed on a helper thread while the wrapped file takes
  // it: SHA-256 runs at about the speed a disk writes (2-3 GB/s each here),
  // so one after the other they took twice as long (docs/performance.md,
  // ninth session). The hash is finished before Append returns, so pieces
  // are still hashed in call order, and `bytes` outlives the helper's read.
  Status Append(std::string_view bytes) override {
    Beside hashing(bytes.size() >= kHashAside, [this, bytes] { digest_.Add(bytes); });
    Status s = base_->Append(bytes);
    hashing.Wait();
    if (!s.ok()) failed_ = true;  // the digest is never recorded
    return s;
  }
  Status Close() override {
    Status s = base_->Close();
    if (s.ok() && !failed_ && !closed_) digest_.Record();
    closed_ = true;
    return s;
  }

 private:
  std::unique_ptr<WritableFile> base_;
  RunningDigest digest_;
  bool failed_ = false, closed_ = false;
};

Result<std::unique_ptr<WritableFile>> DigestingFileSystem::OpenWrite(const std::string& path) {
  return OpenDigested(path, /*stream=*/false);
}

Result<std::unique_ptr<WritableFile>> DigestingFileSystem::OpenWriteStream(const std::string& path) {
  return OpenDigested(path, /*stream=*/true);
}

Result<std::unique_ptr<WritableFile>> DigestingFileSystem::OpenDigested(const std::string& path, bool stream) {
  Forget(path);
  auto f = stream ? base_->OpenWriteStream(path) : base_->OpenWrite(path);
  if (!f.ok()) return f.status();
  return std::unique_ptr<WritableFile>(std::make_unique<DigestingWritableFile>(std::move(f).value(), this, path));
}

Result<std::unique_ptr<ReadableFile>> DigestingFileSystem::OpenRead(const std::string& path) {
  auto f = base_->OpenRead(path);
  if (!f.ok()) return f.status();
  return std::unique_ptr<ReadableFile>(std::make_unique<DigestingFile>(std::move(f).value(), this, path));
}

std::optional<FileDigest> DigestingFileSystem::DigestOf(const std::string& path) const {
  std::lock_guard<std::mutex> lock(mu_);
  auto it = digests_.find(path);
  if (it == digests_.end()) return std::nullopt;
  return it->second;
}

void DigestingFileSystem::Record(const std::string& path, FileDigest d) {
  std::lock_guard<std::mutex> lock(mu_);
  digests_[path] = std::move(d);
}

std::map<std::string, FileDigest> DigestingFileSystem::TakeUnder(const std::string& path) {
  std::lock_guard<std::mutex> lock(mu_);
  std::map<std::string, FileDigest> taken;
  for (auto it = digests_.begin(); it != digests_.end();) {
    const std::string& p = it->first;
    if (p == path || (p.size() > path.size() && p.compare(0, path.size(), path) == 0 && p[path.size()] == '/')) {
      taken.emplace(p.substr(path.size()), std::move(it->second));  // the rest of the path, "" for `path` itself
      it = digests_.erase(it);
    } else {
      ++it;
    }
  }
  return taken;
}

Status DigestingFileSystem::Rename(const std::string& from, const std::string& to) {
  Status s = base_->Rename(from, to);
  std::map<std::string, FileDigest> moved = TakeUnder(from);
  TakeUnder(to);  // whatever `to` held is gone
  if (s.ok()) {
    std::lock_guard<std::mutex> lock(mu_);
    for (auto& [rest, d] : moved) digests_[to + rest] = std::move(d);
  }
  return s;
}

Status DigestingFileSystem::RemoveAll(const std::string& path) {
  TakeUnder(path);
  return base_->RemoveAll(path);
}

void DigestingFileSystem::Forget(const std::string& path) {
  std::lock_guard<std::mutex> lock(mu_);
  digests_.erase(path);
}

}  // namespace prefsift
