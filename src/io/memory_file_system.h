// MemoryFileSystem: a FileSystem (core/file_system.h) held in memory, for
// tests and the whole-pipeline fuzz target, so that a run writes no disk files
// and leaves nothing behind. Files are byte strings keyed by path; folders are
// a set of paths ("/" always exists). It behaves like the POSIX one where the
// code can tell:
// - a file can only be created in an existing folder; a missing file, or a
//   folder, cannot be opened for reading;
// - a written file exists (empty) from OpenWrite and gets its bytes on Close();
// - Rename moves a file, or a folder with everything under it (a folder may
//   only replace an empty folder); MakeDir creates missing parents too;
//   RemoveAll removes a path and everything under it;
// - a reader reads a snapshot of the file taken when it was opened.
// Paths are taken as given (no ".." or "//" folding): use the same spelling
// to write and to read. A relative path's folder is ".", which exists too.
//
// Thread-safety: every method may be called from any thread (one mutex); each
// file object is used by one thread at a time, as the seam requires.
#pragma once

#include <map>
#include <memory>
#include <mutex>
#include <set>
#include <string>
#include <vector>

#include "core/file_system.h"

namespace prefsift {

class MemoryFileSystem : public FileSystem {
 public:
  MemoryFileSystem();

  // Direct access for tests and harnesses (not part of the seam). Put creates
  // the file's missing folders.
  void Put(const std::string& path, std::string bytes);
  bool Get(const std::string& path, std::string* bytes) const;
  // Plain names of the files directly inside `dir`, sorted.
  std::vector<std::string> ListFiles(const std::string& dir) const;
  // Every file and folder path (for "nothing left behind" checks), sorted.
  std::vector<std::string> AllPaths() const;
  void Clear();

  Result<std::unique_ptr<ReadableFile>> OpenRead(const std::string& path) override;
  Result<std::unique_ptr<WritableFile>> OpenWrite(const std::string& path) override;
  Status Rename(const std::string& from, const std::string& to) override;
  Status MakeDir(const std::string& path) override;
  Status RemoveAll(const std::string& path) override;
  bool Exists(const std::string& path) override;
  bool IsDirectory(const std::string& path) override;
  Result<std::vector<std::string>> List(const std::string& dir) override;

 private:
  class Writer;
  void MakeDirLocked(const std::string& path);
  bool HasChildren(const std::string& dir) const;
  void EraseUnder(const std::string& prefix);
  void MoveTree(const std::string& from, const std::string& to);

  mutable std::mutex mu_;
  std::map<std::string, std::string> files_;
  std::set<std::string> dirs_;
};

}  // namespace prefsift
