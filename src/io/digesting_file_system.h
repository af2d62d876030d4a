// A FileSystem that computes the SHA-256 of every file read or written
// through it, as it is read or written: pass 2 reads each input through one,
// and the run's output folder writes through one, so the provenance digests
// of inputs and outputs cost no extra read of them (docs/architecture.md).
//
// A digest is recorded only when a file was read to its end (a Read that
// returned 0) or written and closed without error; opening a file for writing
// forgets the digest held for its path. DigestOf is empty otherwise (a file
// renamed since is looked up by its old path: empty). Everything else is
// passed to the wrapped file system. Thread-safety: files may be read and
// written on several threads; DigestOf is safe at any time.
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

  // The digest of the last complete read or closed write of `path`, if any.
  std::optional<FileDigest> DigestOf(const std::string& path) const;

  Result<std::unique_ptr<ReadableFile>> OpenRead(const std::string& path) override;
  Result<std::unique_ptr<WritableFile>> OpenWrite(const std::string& path) override;
  Result<std::unique_ptr<WritableFile>> OpenWriteStream(const std::string& path) override;
  // A rename moves the digests held for `from` (and inside it) to `to`; a
  // removal forgets them.
  Status Rename(const std::string& from, const std::string& to) override;
  Status MakeDir(const std::string& path) override { return base_->MakeDir(path); }
  Status RemoveAll(const std::string& path) override;
  bool Exists(const std::string& path) override { return base_->Exists(path); }
  bool IsDirectory(const std::string& path) override { return base_->IsDirectory(path); }
  Result<std::vector<std::string>> List(const std::string& dir) override { return base_->List(dir); }

 private:
  friend class RunningDigest;
  // OpenWrite or OpenWriteStream of the wrapped file system, digested.
  Result<std::unique_ptr<WritableFile>> OpenDigested(const std::string& path, bool stream);
  void Record(const std::string& path, FileDigest d);
  void Forget(const std::string& path);
  // Digests of `path` and of paths inside it, removed from the map.
  std::map<std::string, FileDigest> TakeUnder(const std::string& path);
  FileSystem* base_;
  mutable std::mutex mu_;
  std::map<std::string, FileDigest> digests_;
};

}  // namespace prefsift
