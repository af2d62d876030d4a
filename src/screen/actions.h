// What happens to a finding's span: placeholders, pseudonyms, previews.
//
// Formats (specified in docs/personal-data.md):
//   mask          -> "[[masked:<kind id>]]"
//   pseudonymise  -> "[[pseudo:<kind id>:<12 hex>]]", the hex being the first
//                    6 bytes of HMAC-SHA256(key, normalised value)
//   flag, drop    -> text unchanged (drop: the caller rejects the record)
// Preview: "<class>#<bytes>", e.g. "d#19": first character's class
//   (a letter, d digit, p punctuation/symbol, u non-ASCII) and the byte length.
//
// All functions are pure; a PseudonymKey is read-only after construction and
// may be shared by threads.
#pragma once

#include <array>
#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "core/status.h"
#include "screen/screener.h"

namespace prefsift::screen {

// Secret key for pseudonyms. Held in memory only; never written anywhere.
// The bytes are wiped when the key is destroyed.
class PseudonymKey {
 public:
  // REQUIRES: at least 16 bytes (128 bits).
  static Result<PseudonymKey> FromBytes(std::string_view bytes);
  PseudonymKey(PseudonymKey&& o) noexcept;
  PseudonymKey& operator=(PseudonymKey&& o) noexcept;
  PseudonymKey(const PseudonymKey&) = delete;
  PseudonymKey& operator=(const PseudonymKey&) = delete;
  ~PseudonymKey();
  std::string_view bytes() const { return key_; }

 private:
  PseudonymKey() = default;
  void Wipe();
  std::string key_;
};

std::array<uint8_t, 32> HmacSha256(std::string_view key, std::string_view message);

// The value as compared for pseudonyms: a span of only digits and the
// separators " -.()/+" keeps its digits (and a leading '+'); any other span
// is ASCII-lowercased with each run of ASCII white space made one space.
std::string NormaliseForPseudonym(std::string_view value);

std::string MaskPlaceholder(std::string_view kind);
std::string Pseudonym(std::string_view kind, std::string_view value, const PseudonymKey& key);
std::string MaskedPreview(std::string_view value);

// Applies mask and pseudonymise actions; flag and drop leave the text as is.
// Findings may come in any order; one overlapping an earlier-starting finding
// is skipped. Without a key, pseudonymise falls back to mask.
// REQUIRES: findings' offsets refer to `text`.
std::string ApplyActions(std::string_view text, const std::vector<Finding>& findings,
                         const PseudonymKey* key);

}  // namespace prefsift::screen
