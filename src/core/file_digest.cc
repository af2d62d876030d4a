#include "core/file_digest.h"

#include <string_view>

#include "core/sha256.h"

namespace prefsift {

Result<FileDigest> DigestFile(FileSystem* fs, const std::string& path) {
  auto f = fs->OpenRead(path);
  if (!f.ok()) return f.status();
  Sha256 h;
  FileDigest d;
  std::string buf(1 << 20, '\0');
  for (;;) {
    auto n = f.value()->Read(buf.data(), buf.size());
    if (!n.ok()) return n.status();
    if (n.value() == 0) break;
    h.Update(std::string_view(buf.data(), n.value()));
    d.bytes += n.value();
  }
  d.sha256 = h.HexDigest();
  return d;
}

}  // namespace prefsift
