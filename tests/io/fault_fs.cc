#include "fault_fs.h"

namespace prefsift {
namespace {

class FaultWritable : public WritableFile {
 public:
  FaultWritable(std::unique_ptr<WritableFile> f, FaultFileSystem* fs) : f_(std::move(f)), fs_(fs) {}
  Status Append(std::string_view b) override {
    if (fs_->fail_writes_after >= 0 && fs_->written + static_cast<long long>(b.size()) > fs_->fail_writes_after) {
      return Status::Io("injected write error: No space left on device");
    }
    fs_->written += static_cast<long long>(b.size());
    return f_->Append(b);
  }
  Status Close() override { return f_->Close(); }

 private:
  std::unique_ptr<WritableFile> f_;
  FaultFileSystem* fs_;
};

class FaultReadable : public ReadableFile {
 public:
  FaultReadable(std::unique_ptr<ReadableFile> f, FaultFileSystem* fs) : f_(std::move(f)), fs_(fs) {}
  Result<size_t> Read(char* buf, size_t n) override {
    if (fs_->fail_reads_after >= 0 && fs_->read >= fs_->fail_reads_after) {
      return Status::Input("injected read error: Input/output error");
    }
    auto r = f_->Read(buf, n);
    if (r.ok()) fs_->read += static_cast<long long>(r.value());
    return r;
  }

 private:
  std::unique_ptr<ReadableFile> f_;
  FaultFileSystem* fs_;
};

}  // namespace

Result<std::unique_ptr<ReadableFile>> FaultFileSystem::OpenRead(const std::string& path) {
  if (!fail_open_path.empty() && path == fail_open_path) {
    return Status::Input("cannot open " + path + ": Permission denied (injected)");
  }
  auto f = base_->OpenRead(path);
  if (!f.ok()) return f.status();
  return std::unique_ptr<ReadableFile>(new FaultReadable(std::move(f).value(), this));
}

Result<std::unique_ptr<WritableFile>> FaultFileSystem::OpenWrite(const std::string& path) {
  auto f = base_->OpenWrite(path);
  if (!f.ok()) return f.status();
  return std::unique_ptr<WritableFile>(new FaultWritable(std::move(f).value(), this));
}

}  // namespace prefsift
