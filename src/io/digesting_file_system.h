// A FileSystem that computes the SHA-256 of every file read through it, as it
// is read: pass 1 reads each input through one, so the provenance digest of
// an input costs no extra read of it (docs/architecture.md).
//
// A digest is recorded only when a file was read to its end (a Read that
// returned 0); DigestOf is empty otherwise. Everything else is passed to the
// wrapped file system. Thread-safety: files may be read on several threads;
// DigestOf is safe at any time.
#pragma once

#include <cstdint>
#include <map>
#include <mutex>
#include <optional>
#include <string>
#include <vector>

#include "core/file_digest.h"
#include "io/file_system.h"

namespace prefsift {

class DigestingFileSystem : public FileSystem {
 public:
  explicit DigestingFileSystem(FileSystem* base) : base_(base) {}

  // The digest of the last complete read of `path`, if any.
  std::optional<FileDigest> DigestOf(const std::string& path) const;

  Result<std::unique_ptr<ReadableFile>> OpenRead(const std::string& path) override;
  Result<std::unique_ptr<WritableFile>> OpenWrite(const std::string& path) override { return base_->OpenWrite(path); }
  Status Rename(const std::string& from, const std::string& to) override { return base_->Rename(from, to); }
  Status MakeDir(const std::string& path) override { return base_->MakeDir(path); }
  Status RemoveAll(const std::string& path) override { return base_->RemoveAll(path); }
  bool Exists(const std::string& path) override { return base_->Exists(path); }
  bool IsDirectory(const std::string& path) override { return base_->IsDirectory(path); }
  Result<std::vector<std::string>> List(const std::string& dir) override { return base_->List(dir); }

 private:
  friend class DigestingFile;
  void Record(const std::string& path, FileDigest d);
  FileSystem* base_;
  mutable std::mutex mu_;
  std::map<std::string, FileDigest> digests_;
};

}  // namespace prefsift
