// A FileSystem wrapper for tests that fails writes or reads on demand.
#pragma once

#include <atomic>
#include <string>

#include "io/file_system.h"

namespace prefsift {

class FaultFileSystem : public FileSystem {
 public:
  explicit FaultFileSystem(FileSystem* base) : base_(base) {}
  // Writes fail (as a full disk would) after this many bytes in total; -1 = never.
  long long fail_writes_after = -1;
  // Reads fail after this many bytes in total; -1 = never.
  long long fail_reads_after = -1;
  // Opening this path for reading fails as a file without read permission
  // would (chmod 000 does not stop root, so tests run as root use this).
  std::string fail_open_path;

  Result<std::unique_ptr<ReadableFile>> OpenRead(const std::string& path) override;
  Result<std::unique_ptr<WritableFile>> OpenWrite(const std::string& path) override;
  Status Rename(const std::string& from, const std::string& to) override { return base_->Rename(from, to); }
  Status MakeDir(const std::string& path) override { return base_->MakeDir(path); }
  Status RemoveAll(const std::string& path) override { return base_->RemoveAll(path); }
  bool Exists(const std::string& path) override { return base_->Exists(path); }
  bool IsDirectory(const std::string& path) override { return base_->IsDirectory(path); }
  Result<std::vector<std::string>> List(const std::string& dir) override { return base_->List(dir); }

  // Atomic: the pipeline reads and writes from more than one thread (read-ahead,
  // parallel hashing of outputs).
  std::atomic<long long> written{0}, read{0};

 private:
  FileSystem* base_;
};

}  // namespace prefsift
