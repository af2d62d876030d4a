#include "io/output_dir.h"

#include <unistd.h>

namespace prefsift {

Result<std::unique_ptr<OutputDir>> OutputDir::Begin(FileSystem* fs, const std::string& dir_in, bool overwrite) {
  std::string dir = dir_in;
  while (dir.size() > 1 && dir.back() == '/') dir.pop_back();
  if (dir.empty()) return Status::Usage("the output folder name is empty");
  if (fs->Exists(dir) && !overwrite) {
    return Status::Usage("the output folder " + dir + " already exists; choose another or pass --overwrite");
  }
  std::string staging = dir + ".partial-" + std::to_string(::getpid());
  if (fs->Exists(staging)) {
    Status s = fs->RemoveAll(staging);
    if (!s.ok()) return s;
  }
  Status s = fs->MakeDir(staging);
  if (!s.ok()) return s;
  return std::unique_ptr<OutputDir>(new OutputDir(fs, dir, staging, overwrite));
}

OutputDir::~OutputDir() {
  if (!committed_) (void)fs_->RemoveAll(staging_);
}

Result<std::unique_ptr<WritableFile>> OutputDir::Create(const std::string& name) {
  return fs_->OpenWrite(staging_ + "/" + name);
}

Status OutputDir::Write(const std::string& name, std::string_view bytes) {
  auto f = Create(name);
  if (!f.ok()) return f.status();
  Status s = f.value()->Append(bytes);
  if (s.ok()) s = f.value()->Close();
  return s;
}

Status OutputDir::Commit() {
  std::string aside;
  if (fs_->Exists(dir_)) {
    if (!overwrite_) return Status::Usage("the output folder " + dir_ + " appeared during the run; not overwriting it");
    aside = dir_ + ".old-" + std::to_string(::getpid());
    Status s = fs_->Rename(dir_, aside);
    if (!s.ok()) return s;
  }
  Status s = fs_->Rename(staging_, dir_);
  if (!s.ok()) {
    if (!aside.empty()) (void)fs_->Rename(aside, dir_);
    return s;
  }
  committed_ = true;
  if (!aside.empty()) return fs_->RemoveAll(aside);
  return Status::Ok();
}

Status WriteFileAtomically(FileSystem* fs, const std::string& path, std::string_view bytes) {
  std::string tmp = path + ".tmp-" + std::to_string(::getpid());
  auto f = fs->OpenWrite(tmp);
  if (!f.ok()) return f.status();
  Status s = f.value()->Append(bytes);
  if (s.ok()) s = f.value()->Close();
  if (!s.ok()) {
    (void)fs->RemoveAll(tmp);
    return s;
  }
  return fs->Rename(tmp, path);
}

}  // namespace prefsift
