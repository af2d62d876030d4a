// Digests while reading; see digesting_file_system.h.
#include "io/digesting_file_system.h"

#include "core/sha256.h"

namespace prefsift {

class DigestingFile : public ReadableFile {
 public:
  DigestingFile(std::unique_ptr<ReadableFile> base, DigestingFileSystem* owner, std::string path)
      : base_(std::move(base)), owner_(owner), path_(std::move(path)) {}

  Result<size_t> Read(char* buf, size_t n) override {
    auto got = base_->Read(buf, n);
    if (!got.ok() || done_) return got;
    if (got.value() == 0) {
      done_ = true;
      owner_->Record(path_, FileDigest{hash_.HexDigest(), bytes_});
      return got;
    }
    hash_.Update(std::string_view(buf, got.value()));
    bytes_ += got.value();
    return got;
  }

 private:
  std::unique_ptr<ReadableFile> base_;
  DigestingFileSystem* owner_;
  std::string path_;
  Sha256 hash_;
  uint64_t bytes_ = 0;
  bool done_ = false;
};

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

}  // namespace prefsift
