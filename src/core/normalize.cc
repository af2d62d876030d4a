#include "core/normalize.h"

#include <utf8proc.h>

#include <cstdint>
#include <cstdlib>
#include <cstring>

#include "core/normalize_ascii.h"

namespace prefsift {
namespace detail {

// Steps 3 and 2's classes (core/normalize.h); the ASCII path's masks are
// checked against them (core/normalize_ascii.h).
bool IsSpaceCodepoint(int32_t cp) {
  if (cp == 0x09 || cp == 0x0A || cp == 0x0B || cp == 0x0C || cp == 0x0D || cp == 0x20 || cp == 0x85) return true;
  if (cp < 0x80) return false;
  auto cat = utf8proc_category(cp);
  return cat == UTF8PROC_CATEGORY_ZS || cat == UTF8PROC_CATEGORY_ZL || cat == UTF8PROC_CATEGORY_ZP;
}

bool IsPunctCodepoint(int32_t cp) {
  auto cat = utf8proc_category(cp);
  return cat == UTF8PROC_CATEGORY_PC || cat == UTF8PROC_CATEGORY_PD || cat == UTF8PROC_CATEGORY_PS ||
         cat == UTF8PROC_CATEGORY_PE || cat == UTF8PROC_CATEGORY_PI || cat == UTF8PROC_CATEGORY_PF ||
         cat == UTF8PROC_CATEGORY_PO;
}

}  // namespace detail

namespace {

using detail::IsPunctCodepoint;
using detail::IsSpaceCodepoint;

// 64 bytes a step (eight 8-byte words OR-ed, which the compiler vectorises),
// the rest a byte at a time.
bool IsAscii(std::string_view s) {
  const char* p = s.data();
  const size_t n = s.size();
  size_t i = 0;
  for (; i + 64 <= n; i += 64) {
    uint64_t w[8];
    std::memcpy(w, p + i, 64);
    if (((w[0] | w[1] | w[2] | w[3] | w[4] | w[5] | w[6] | w[7]) & 0x8080808080808080ULL) != 0) return false;
  }
  unsigned high = 0;
  for (; i < n; ++i) high |= static_cast<unsigned char>(p[i]);
  return high < 0x80;
}

std::string MapWith(std::string_view text, int options) {
  utf8proc_uint8_t* out = nullptr;
  utf8proc_ssize_t n = utf8proc_map(reinterpret_cast<const utf8proc_uint8_t*>(text.data()),
                                    static_cast<utf8proc_ssize_t>(text.size()), &out,
                                    static_cast<utf8proc_option_t>(options));
  if (n < 0) {
    // Invalid UTF-8 never reaches here (ingest validates); be safe anyway and
    // fall back to the bytes unchanged.
    return std::string(text);
  }
  std::string result(reinterpret_cast<char*>(out), static_cast<size_t>(n));
  std::free(out);
  return result;
}

// The ASCII character a look-alike punctuation mark stands for, or 0: single
// quotes and apostrophes, double quotes, hyphens and dashes, the minus sign.
// (Full-width forms and the ellipsis are already ASCII after NFKC.)
char LookAlikeAscii(utf8proc_int32_t cp) {
  switch (cp) {
    case 0x2018: case 0x2019: case 0x201A: case 0x201B: case 0x2032: case 0x2035: case 0x02BC:
      return '\'';
    case 0x201C: case 0x201D: case 0x201E: case 0x201F: case 0x2033: case 0x2036: case 0x00AB: case 0x00BB:
      return '"';
    case 0x2010: case 0x2011: case 0x2012: case 0x2013: case 0x2014: case 0x2015: case 0x2212: case 0xFE58:
    case 0xFE63: case 0x2E3A: case 0x2E3B:
      return '-';
    default:
      return 0;
  }
}

// Folds white space, folds look-alike punctuation to ASCII and optionally
// removes punctuation, walking code points.
std::string FoldSpaceAndPunct(std::string_view s, bool strip_punct) {
  std::string out;
  out.reserve(s.size());
  bool pending_space = false;
  size_t i = 0;
  const auto* p = reinterpret_cast<const utf8proc_uint8_t*>(s.data());
  while (i < s.size()) {
    unsigned char c = static_cast<unsigned char>(s[i]);
    utf8proc_int32_t cp;
    size_t len;
    if (c < 0x80) {
      cp = c;
      len = 1;
    } else {
      utf8proc_ssize_t n = utf8proc_iterate(p + i, static_cast<utf8proc_ssize_t>(s.size() - i), &cp);
      if (n <= 0) {  // not reachable for validated input; keep the byte
        cp = -1;
        len = 1;
      } else {
        len = static_cast<size_t>(n);
      }
    }
    if (cp >= 0 && IsSpaceCodepoint(cp)) {
      pending_space = !out.empty();
    } else if (cp >= 0 && strip_punct && IsPunctCodepoint(cp)) {
      // dropped
    } else {
      if (pending_space) out.push_back(' ');
      pending_space = false;
      const char ascii = cp >= 0 ? LookAlikeAscii(cp) : 0;
      if (ascii) out.push_back(ascii);
      else out.append(s.data() + i, len);
    }
    i += len;
  }
  return out;
}

}  // namespace

void NormalizeForMatchInto(std::string_view text, const NormalizeOptions& options, std::string* out) {
  // ASCII is exact in one pass: NFKC leaves ASCII unchanged, ASCII has no
  // default-ignorables, full case folding of ASCII is ASCII lowercase, and
  // lowercasing never changes whether a byte is space or punctuation.
  if (IsAscii(text)) {
    detail::FoldAscii(text, options.strip_punctuation, out);
    return;
  }
  std::string folded = MapWith(text, UTF8PROC_STABLE | UTF8PROC_COMPOSE | UTF8PROC_COMPAT | UTF8PROC_CASEFOLD |
                                         UTF8PROC_IGNORE);
  *out = FoldSpaceAndPunct(folded, options.strip_punctuation);
}

std::string NormalizeForMatch(std::string_view text, const NormalizeOptions& options) {
  std::string out;
  NormalizeForMatchInto(text, options, &out);
  return out;
}

std::string NfkcOnly(std::string_view text) {
  return MapWith(text, UTF8PROC_STABLE | UTF8PROC_COMPOSE | UTF8PROC_COMPAT);
}

bool IsValidUtf8(std::string_view s) {
  size_t i = 0;
  const size_t n = s.size();
  while (i < n) {
    unsigned char c = static_cast<unsigned char>(s[i]);
    if (c < 0x80) {
      ++i;
      continue;
    }
    size_t len;
    uint32_t cp;
    if ((c & 0xE0) == 0xC0) {
      len = 2;
      cp = c & 0x1F;
    } else if ((c & 0xF0) == 0xE0) {
      len = 3;
      cp = c & 0x0F;
    } else if ((c & 0xF8) == 0xF0) {
      len = 4;
      cp = c & 0x07;
    } else {
      return false;
    }
    if (i + len > n) return false;
    for (size_t k = 1; k < len; ++k) {
      unsigned char cc = static_cast<unsigned char>(s[i + k]);
      if ((cc & 0xC0) != 0x80) return false;
      cp = (cp << 6) | (cc & 0x3F);
    }
    if ((len == 2 && cp < 0x80) || (len == 3 && cp < 0x800) || (len == 4 && cp < 0x10000)) return false;  // overlong
    if (cp > 0x10FFFF || (cp >= 0xD800 && cp <= 0xDFFF)) return false;
    i += len;
  }
  return true;
}

}  // namespace prefsift
