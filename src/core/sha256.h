// SHA-256 (FIPS 180-4) via OpenSSL, for provenance digests.
// Thread-safe.
#pragma once

#include <memory>
#include <string>
#include <string_view>

namespace prefsift {

std::string Sha256Hex(std::string_view bytes);

// Incremental SHA-256 for files streamed in pieces.
class Sha256 {
 public:
  Sha256();
  ~Sha256();
  void Update(std::string_view bytes);
  std::string HexDigest();  // finishes; call once

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

}  // namespace prefsift
