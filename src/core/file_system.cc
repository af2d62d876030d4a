#include "core/file_system.h"

namespace prefsift {

Result<std::string> ReadWholeFile(FileSystem* fs, const std::string& path) {
  auto f = fs->OpenRead(path);
  if (!f.ok()) return f.status();
  std::string out;
  std::string buf(1 << 16, '\0');
  for (;;) {
    auto n = f.value()->Read(buf.data(), buf.size());
    if (!n.ok()) return n.status();
    if (n.value() == 0) break;
    out.append(buf.data(), n.value());
  }
  return out;
}

}  // namespace prefsift
