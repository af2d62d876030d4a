// Placeholders, pseudonyms (HMAC-SHA256, RFC 2104 / FIPS 180-4) and previews.
// See actions.h. Pure functions; thread-safe.
#include "screen/actions.h"

#include <algorithm>

#include <openssl/crypto.h>
#include <openssl/evp.h>
#include <openssl/hmac.h>

namespace prefsift::screen {

Result<PseudonymKey> PseudonymKey::FromBytes(std::string_view bytes) {
  if (bytes.size() < 16) {
    return Status::Usage("pseudonym key must be at least 16 bytes (got " + std::to_string(bytes.size()) + ")");
  }
  PseudonymKey k;
  k.key_.assign(bytes.data(), bytes.size());
  return k;
}

PseudonymKey::PseudonymKey(PseudonymKey&& o) noexcept : key_(std::move(o.key_)) { o.Wipe(); }

PseudonymKey& PseudonymKey::operator=(PseudonymKey&& o) noexcept {
  if (this != &o) {
    Wipe();
    key_ = std::move(o.key_);
    o.Wipe();
  }
  return *this;
}

PseudonymKey::~PseudonymKey() { Wipe(); }

void PseudonymKey::Wipe() {
  if (!key_.empty()) OPENSSL_cleanse(key_.data(), key_.size());
  key_.clear();
}

std::array<uint8_t, 32> HmacSha256(std::string_view key, std::string_view message) {
  std::array<uint8_t, 32> md{};
  unsigned int len = 0;
  HMAC(EVP_sha256(), key.data(), static_cast<int>(key.size()),
       reinterpret_cast<const unsigned char*>(message.data()), message.size(), md.data(), &len);
  return md;
}

std::string NormaliseForPseudonym(std::string_view value) {
  bool numeric = false, other = false;
  for (char c : value) {
    if (c >= '0' && c <= '9') numeric = true;
    else if (std::string_view(" -.()/+").find(c) == std::string_view::npos) other = true;
  }
  std::string out;
  if (numeric && !other) {
    size_t i = 0;
    while (i < value.size() && value[i] == ' ') ++i;
    if (i < value.size() && value[i] == '+') out.push_back('+');
    for (char c : value) {
      if (c >= '0' && c <= '9') out.push_back(c);
    }
    return out;
  }
  // Other spans: ASCII-lower-cased, each run of ASCII white space made one
  // space (so a name split over a line break or doubly spaced agrees).
  for (char c : value) {
    bool space = c == ' ' || c == '\n' || c == '\t' || c == '\r';
    if (space) {
      if (!out.empty() && out.back() != ' ') out.push_back(' ');
      continue;
    }
    out.push_back(c >= 'A' && c <= 'Z' ? static_cast<char>(c - 'A' + 'a') : c);
  }
  while (!out.empty() && out.back() == ' ') out.pop_back();
  return out;
}

std::string MaskPlaceholder(std::string_view rule_id) {
  return "[[masked:" + std::string(rule_id) + "]]";
}

std::string Pseudonym(std::string_view rule_id, std::string_view value, const PseudonymKey& key) {
  std::array<uint8_t, 32> md = HmacSha256(key.bytes(), NormaliseForPseudonym(value));
  static constexpr char kHex[] = "0123456789abcdef";
  std::string hex;
  for (int i = 0; i < 6; ++i) {
    hex.push_back(kHex[md[static_cast<size_t>(i)] >> 4]);
    hex.push_back(kHex[md[static_cast<size_t>(i)] & 15]);
  }
  return "[[pseudo:" + std::string(rule_id) + ":" + hex + "]]";
}

std::string MaskedPreview(std::string_view value) {
  char cls = 'p';
  if (!value.empty()) {
    unsigned char c = static_cast<unsigned char>(value[0]);
    if (c >= 0x80) cls = 'u';
    else if (c >= '0' && c <= '9') cls = 'd';
    else if ((c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z')) cls = 'a';
  }
  return std::string(1, cls) + "#" + std::to_string(value.size());
}

std::string ApplyActions(std::string_view text, const std::vector<Finding>& findings, const PseudonymKey* key) {
  std::vector<const Finding*> order;
  for (const Finding& f : findings) {
    if ((f.action == Action::kMask || f.action == Action::kPseudonymise) && f.begin < f.end &&
        f.end <= text.size()) {
      order.push_back(&f);
    }
  }
  std::stable_sort(order.begin(), order.end(),
                   [](const Finding* a, const Finding* b) { return a->begin < b->begin; });
  std::string out;
  out.reserve(text.size() + 32 * order.size());
  size_t pos = 0;
  for (const Finding* f : order) {
    if (f->begin < pos) continue;  // overlaps an earlier replacement
    out.append(text.substr(pos, f->begin - pos));
    std::string_view value = text.substr(f->begin, f->end - f->begin);
    if (f->action == Action::kPseudonymise && key != nullptr) {
      out += Pseudonym(f->kind.empty() ? f->rule_id : f->kind, value, *key);
    } else {
      out += MaskPlaceholder(f->kind.empty() ? f->rule_id : f->kind);
    }
    pos = f->end;
  }
  out.append(text.substr(pos));
  return out;
}

}  // namespace prefsift::screen
