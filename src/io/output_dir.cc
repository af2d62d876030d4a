#include "io/output_dir.h"

#include <unistd.h>

#include <filesystem>

#include "io/signal_cleanup.h"

namespace prefsift {

Result<std::unique_ptr<OutputDir>> OutputDir::Begin(FileSystem* fs, const std::string& dir_in, bool overwrite) {
  std::string dir = dir_in;
  while (dir.size() > 1 && dir.back() == '/') dir.pop_back();
  if (dir.empty()) return Status::Usage("the output folder name is empty");
  if (fs->Exists(dir) && !fs->IsDirectory(dir)) {
    return Status::Usage("the output folder " + dir + " is an existing file, not a folder; prefsift never replaces a "
                         "file with its output folder (with or without --overwrite): choose another name");
  }
  if (fs->Exists(dir) && !overwrite) {
    return Status::Usage("the output folder " + dir + " already exists; choose another or pass --overwrite");
  }
  std::string staging = dir + ".partial-" + std::to_string(::getpid());
  if (fs->Exists(staging)) {
    Status s = fs->RemoveAll(staging);
    if (!s.ok()) return s;
  }
  // Made and listed for removal as one step (a stop signal between the two
  // would leave the folder behind).
  Status s = CreatePartialOutput(staging, [&] { return fs->MakeDir(staging); });
  if (!s.ok()) return s;
  return std::unique_ptr<OutputDir>(new OutputDir(fs, dir, staging, overwrite));
}

OutputDir::~OutputDir() {
  if (!committed_) (void)fs_->RemoveAll(staging_);
  UnregisterPartialOutput(staging_);
}

Result<std::unique_ptr<WritableFile>> OutputDir::Create(const std::string& name) {
  return fs_->OpenWrite(staging_ + "/" + name);
}

Result<std::unique_ptr<WritableFile>> OutputDir::CreateStream(const std::string& name) {
  return fs_->OpenWriteStream(staging_ + "/" + name);
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

namespace {

std::filesystem::path Resolved(std::string p) {
  while (p.size() > 1 && p.back() == '/') p.pop_back();
  std::error_code ec;
  std::filesystem::path abs = std::filesystem::absolute(p, ec);
  if (ec) abs = p;
  std::filesystem::path r = std::filesystem::weakly_canonical(abs, ec);
  return (ec ? abs.lexically_normal() : r);
}

// True when `inner` is `outer` or lies inside it (component-wise).
bool Within(const std::filesystem::path& inner, const std::filesystem::path& outer) {
  auto i = inner.begin();
  for (auto o = outer.begin(); o != outer.end(); ++o, ++i) {
    if (o->empty()) continue;  // a trailing separator
    if (i == inner.end() || *i != *o) return false;
  }
  return true;
}

}  // namespace

Status CheckOutputClear(const std::string& out, const std::vector<ReadPath>& reads) {
  const std::filesystem::path o = Resolved(out);
  for (const auto& r : reads) {
    if (r.path.empty()) continue;
    const std::filesystem::path p = Resolved(r.path);
    const char* how = nullptr;
    if (p == o) {
      how = "is";
    } else if (Within(p, o)) {
      how = "contains";
    } else if (Within(o, p)) {
      how = "lies inside";
    }
    if (how) {
      return Status::Usage("the output folder " + out + " " + how + " the " + r.role + " " + r.path +
                           "; writing there could destroy what the run reads: choose an output folder apart from "
                           "every input");
    }
  }
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
