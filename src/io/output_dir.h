// OutputDir: an output folder that appears complete or not at all.
//
// Files are written into a sibling staging folder "<dir>.partial-<pid>";
// Commit() renames it to <dir> (moving an existing <dir> aside first when
// overwriting is allowed, then removing it). If the run fails or the object is
// destroyed before Commit(), the staging folder is removed and <dir> is left
// as it was. An existing <dir> is never touched unless `overwrite` is true.
// Thread-safety: not thread-safe; one run owns it.
#pragma once

#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "core/status.h"
#include "io/file_system.h"

namespace prefsift {

class OutputDir {
 public:
  static Result<std::unique_ptr<OutputDir>> Begin(FileSystem* fs, const std::string& dir, bool overwrite);
  ~OutputDir();

  // A new file in the staging folder; `name` is a plain file name.
  Result<std::unique_ptr<WritableFile>> Create(const std::string& name);
  // The same for a large file written once, start to end (FileSystem::OpenWriteStream).
  Result<std::unique_ptr<WritableFile>> CreateStream(const std::string& name);
  // A whole small file at once: Create, Append, Close.
  Status Write(const std::string& name, std::string_view bytes);
  // Path of a file in the staging folder (for tools that write by path).
  std::string StagingPath(const std::string& name) const { return staging_ + "/" + name; }
  const std::string& final_path() const { return dir_; }
  Status Commit();

 private:
  OutputDir(FileSystem* fs, std::string dir, std::string staging, bool overwrite)
      : fs_(fs), dir_(std::move(dir)), staging_(std::move(staging)), overwrite_(overwrite) {}
  FileSystem* fs_;
  std::string dir_, staging_;
  bool overwrite_;
  bool committed_ = false;
};

// A file or folder that a run reads, and what it is to the run ("input",
// "plan", "evaluation set", "rule pack", "key file", "store", ...).
struct ReadPath {
  std::string path;
  std::string role;
};

// Refuses (usage error naming both paths) an output folder that is, contains,
// or lies inside any path the run reads: writing there, or replacing it with
// --overwrite, would destroy the run's own input. Paths are compared after
// resolving symbolic links and "..", so "./x", "x/" and a link to x are one.
Status CheckOutputClear(const std::string& out, const std::vector<ReadPath>& reads);

// Writes `bytes` to `path` atomically (temporary name in the same folder, then
// rename). For single files outside an OutputDir, e.g. a store export.
Status WriteFileAtomically(FileSystem* fs, const std::string& path, std::string_view bytes);

}  // namespace prefsift
