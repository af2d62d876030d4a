// Surface text features; see surface_features.h. Pure, thread-safe.
#include "stats/surface_features.h"

#include <array>
#include <bit>
#include <cstring>
#include <cstddef>
#include <cstdint>
#include <string>

#include "core/blank.h"
#include "core/byte_block.h"

namespace prefsift::stats {
namespace {

// English only. Lower case; matched against the lower-cased (ASCII) text with
// U+2019 folded to "'". Our own list of common refusal/apology openings.
constexpr const char* kRefusalPhrases[] = {
    "i'm sorry",
    "i am sorry",
    "i apologize",
    "i apologise",
    "my apologies",
    "i cannot",
    "i can't help",
    "i can't assist",
    "i can't provide",
    "i can't do that",
    "i'm unable to",
    "i am unable to",
    "i'm not able to",
    "i am not able to",
    "i won't be able to",
    "as an ai",
    "as a language model",
};

bool IsSpace(char c) {
  return c == ' ' || c == '\t' || c == '\n' || c == '\v' || c == '\f' || c == '\r';
}
bool IsAlnum(char c) {
  return (c >= '0' && c <= '9') || (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z');
}
char Lower(char c) { return (c >= 'A' && c <= 'Z') ? static_cast<char>(c - 'A' + 'a') : c; }

// Leading spaces (tab = 4) and the rest of the line.
size_t Indent(std::string_view line, size_t* pos) {
  size_t width = 0, i = 0;
  while (i < line.size() && (line[i] == ' ' || line[i] == '\t')) {
    width += line[i] == '\t' ? 4 : 1;
    ++i;
  }
  *pos = i;
  return width;
}

bool IsListItem(std::string_view line) {
  size_t i;
  Indent(line, &i);
  if (i >= line.size()) return false;
  size_t after;
  const char c = line[i];
  if (c == '-' || c == '*' || c == '+') {
    after = i + 1;
  } else {
    size_t j = i;
    while (j < line.size() && j - i < 9 && line[j] >= '0' && line[j] <= '9') ++j;
    if (j == i || j >= line.size() || (line[j] != '.' && line[j] != ')')) return false;
    after = j + 1;
  }
  return after < line.size() && (line[after] == ' ' || line[after] == '\t');
}

bool IsHeading(std::string_view line) {
  size_t i = 0;
  while (i < line.size() && i < 3 && line[i] == ' ') ++i;
  size_t hashes = 0;
  while (i < line.size() && line[i] == '#') {
    ++hashes;
    ++i;
  }
  if (hashes < 1 || hashes > 6) return false;
  return i == line.size() || line[i] == ' ' || line[i] == '\t';
}

bool IsFence(std::string_view line) {
  size_t i = 0;
  while (i < line.size() && i < 3 && line[i] == ' ') ++i;
  if (i + 3 > line.size()) return false;
  const char c = line[i];
  return (c == '`' || c == '~') && line[i + 1] == c && line[i + 2] == c;
}

// Matching against the text as if it were lower-cased (ASCII) with U+2019
// folded to "'", without building that folded copy: every phrase and marker
// is ASCII, so a match starts at an ASCII byte, and a "'" in a phrase matches
// either "'" or the three bytes of U+2019 (E2 80 99).
//
// Length of the match of `phrase` at text[pos], or 0.
size_t MatchFolded(std::string_view text, size_t pos, const char* phrase) {
  size_t i = pos;
  for (const char* p = phrase; *p; ++p) {
    if (i >= text.size()) return 0;
    if (*p == '\'' && i + 2 < text.size() && static_cast<unsigned char>(text[i]) == 0xE2 &&
        static_cast<unsigned char>(text[i + 1]) == 0x80 && static_cast<unsigned char>(text[i + 2]) == 0x99) {
      i += 3;
      continue;
    }
    if (Lower(text[i]) != *p) return 0;
    ++i;
  }
  return i - pos;
}

// The character before text[pos] in the folded text is alphanumeric.
bool AlnumBefore(std::string_view text, size_t pos) { return pos > 0 && IsAlnum(text[pos - 1]); }

// The byte pairs a refusal phrase or URL marker can start with, in any ASCII
// case: "i " "i'" "i" + E2 (U+2019), "my", "as", "ht", "ww". A bitmap over all
// 65,536 pairs, so the scan below costs one load and one bit test per byte.
class StartPairs {
 public:
  StartPairs() {
    auto both = [](char c) { return std::string{c, static_cast<char>(c - 'a' + 'A')}; };
    auto add = [&](const std::string& firsts, const std::string& seconds) {
      for (char a : firsts)
        for (char b : seconds) {
          unsigned key = static_cast<unsigned char>(a) | (static_cast<unsigned>(static_cast<unsigned char>(b)) << 8);
          bits_[key >> 6] |= uint64_t{1} << (key & 63);
        }
    };
    add(both('i'), std::string(" '") + '\xE2');
    add(both('m'), both('y'));
    add(both('a'), both('s'));
    add(both('h'), both('t'));
    add(both('w'), both('w'));
  }
  bool Has(unsigned char a, unsigned char b) const {
    unsigned key = a | (static_cast<unsigned>(b) << 8);
    return (bits_[key >> 6] >> (key & 63)) & 1;
  }

 private:
  uint64_t bits_[1024] = {};
};

// A refusal phrase or URL starting at text[pos], a start pair (StartPairs).
void CheckPhraseAt(std::string_view text, size_t pos, SurfaceFeatures* f) {
  const char c = Lower(text[pos]);
  if (c == 'h') {
    if (!f->has_url && (MatchFolded(text, pos, "http://") || MatchFolded(text, pos, "https://"))) f->has_url = true;
  } else if (c == 'w') {
    if (!f->has_url && !AlnumBefore(text, pos) && MatchFolded(text, pos, "www.") && pos + 4 < text.size() &&
        IsAlnum(text[pos + 4])) {
      f->has_url = true;
    }
  } else if (!f->has_refusal) {  // 'i', 'm' or 'a'
    for (const char* phrase : kRefusalPhrases) {
      if (phrase[0] == c && MatchFolded(text, pos, phrase)) {
        f->has_refusal = true;
        break;
      }
    }
  }
}

// Refusal phrases and URLs in one pass over the text.
void ScanPhrases(std::string_view text, SurfaceFeatures* f) {
  static const StartPairs kStarts;
  const auto* p = reinterpret_cast<const unsigned char*>(text.data());
  for (size_t pos = 0; pos + 1 < text.size() && !(f->has_refusal && f->has_url); ++pos) {
    if (!kStarts.Has(p[pos], p[pos + 1])) continue;
    CheckPhraseAt(text, pos, f);
  }
}

// False when no phrase or URL marker can start at text[pos], by its first
// four bytes with bit 0x20 set (ASCII letters folded to lower case; other
// bytes may collide, which only lets more through): every phrase and marker
// is at least four bytes long, and its first four are one of these (a "'"
// in them stands for itself or for the first bytes of U+2019).
bool MayStartPhrase(std::string_view text, size_t pos) {
  if (pos + 4 > text.size()) return true;  // near the end: the full check decides
  auto word = [](char a, char b, char c, char d) {
    return static_cast<uint32_t>(static_cast<unsigned char>(a)) |
           static_cast<uint32_t>(static_cast<unsigned char>(b)) << 8 |
           static_cast<uint32_t>(static_cast<unsigned char>(c)) << 16 |
           static_cast<uint32_t>(static_cast<unsigned char>(d)) << 24;
  };
  static const uint32_t kPrefixes[] = {
      word('i', '\'', 'm', ' '), word('i', '\xE2', '\xA0', '\xB9'),  // i'm, i + U+2019 (E2 80 99, folded)
      word('i', ' ', 'a', 'm'),   word('i', ' ', 'a', 'p'),    word('i', ' ', 'c', 'a'), word('i', ' ', 'w', 'o'),
      word('m', 'y', ' ', 'a'),   word('a', 's', ' ', 'a'),    word('h', 't', 't', 'p'), word('w', 'w', 'w', '.')};
  uint32_t four;
  std::memcpy(&four, text.data() + pos, 4);
  four = (four | 0x20202020u);
  if constexpr (std::endian::native == std::endian::big) four = __builtin_bswap32(four);
  for (uint32_t p : kPrefixes) {
    if (four == p) return true;
  }
  return false;
}

// The line features, one line (without its "\n") at a time, in order.
class LineScan {
 public:
  void Line(std::string_view line, SurfaceFeatures* f) {
    if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
    if (IsBlank(line)) {
      previous_blank_ = true;
      return;
    }
    size_t pos;
    const size_t indent = Indent(line, &pos);
    const bool list_item = IsListItem(line);
    if (list_item) ++f->list_items;
    if (IsHeading(line)) f->has_heading = true;
    if (IsFence(line)) f->has_code_block = true;
    if (indent >= 4 && previous_blank_ && !in_list_ && !list_item) f->has_code_block = true;
    if (list_item) {
      in_list_ = true;
    } else if (indent == 0) {
      in_list_ = false;
    }
    previous_blank_ = false;
  }

 private:
  bool previous_blank_ = true;  // the start of text counts as after a blank line
  bool in_list_ = false;        // the last non-blank line was a list item or its continuation
};

}  // namespace

std::span<const char* const> RefusalPhrases() { return kRefusalPhrases; }

SurfaceFeatures ComputeSurfaceFeaturesReference(std::string_view text) {
  SurfaceFeatures f;
  // Branch-free: a table lookup per byte.
  static const auto kSpaceByte = [] {
    std::array<uint8_t, 256> t{};
    for (int c = 0; c < 256; ++c) t[static_cast<size_t>(c)] = IsSpace(static_cast<char>(c)) ? 1 : 0;
    return t;
  }();
  uint64_t code_points = 0, words = 0;
  unsigned in_word = 0;
  for (char c : text) {
    const unsigned char u = static_cast<unsigned char>(c);
    code_points += (u & 0xC0) != 0x80;
    const unsigned word_byte = kSpaceByte[u] ^ 1u;
    words += word_byte & (in_word ^ 1u);
    in_word = word_byte;
  }
  f.code_points = code_points;
  f.words = words;
  // Line scan.
  LineScan lines;
  size_t start = 0;
  while (start <= text.size()) {
    size_t end = text.find('\n', start);
    if (end == std::string_view::npos) end = text.size();
    lines.Line(text.substr(start, end - start), &f);
    if (end == text.size()) break;
    start = end + 1;
  }
  ScanPhrases(text, &f);
  return f;
}

// ComputeSurfaceFeaturesReference's three scans in one pass of 64-byte blocks
// (core/byte_block.h): code points and word starts are counted by masks, the
// lines are cut at the newline bits, and the phrases are checked only where a
// start pair's mask bit is set (the pairs of StartPairs, from a block and the
// same block one byte later).
SurfaceFeatures ComputeSurfaceFeatures(std::string_view text) {
  SurfaceFeatures f;
  uint64_t code_points = 0, words = 0;
  uint64_t space_before = 1;  // bit 0: the byte before the block is white space (or the text starts)
  LineScan lines;
  size_t line_start = 0;
  ForEachBlock64(text, 1, [&](const unsigned char* p, size_t base, uint64_t valid) {
    const Block64 b(p);
    code_points += static_cast<uint64_t>(PopCount64(valid & ~b.InRange(0x80, 0xBF)));
    const uint64_t space = b.Eq(' ') | b.InRange('\t', '\r');
    words += static_cast<uint64_t>(PopCount64(valid & ~space & (space << 1 | space_before)));
    space_before = space >> 63;
    for (uint64_t nl = b.Eq('\n') & valid; nl != 0; nl &= nl - 1) {
      const size_t end = base + static_cast<size_t>(__builtin_ctzll(nl));
      lines.Line(text.substr(line_start, end - line_start), &f);
      line_start = end + 1;
    }
    if (f.has_refusal && f.has_url) return;
    const Block64 next(p + 1);  // the byte after each byte (0 past the end)
    uint64_t starts = (b.EqFolded('i') & (next.Eq(' ') | next.Eq('\'') | next.Eq(0xE2))) |
                      (b.EqFolded('m') & next.EqFolded('y')) | (b.EqFolded('a') & next.EqFolded('s')) |
                      (b.EqFolded('h') & next.EqFolded('t')) | (b.EqFolded('w') & next.EqFolded('w'));
    // A start needs its second byte in the text (pos + 1 < n): bits past the
    // end already read 0 as the second byte, which no pair has.
    starts &= valid;
    for (; starts != 0 && !(f.has_refusal && f.has_url); starts &= starts - 1) {
      const size_t pos = base + static_cast<size_t>(__builtin_ctzll(starts));
      if (MayStartPhrase(text, pos)) CheckPhraseAt(text, pos, &f);
    }
  });
  lines.Line(text.substr(line_start), &f);
  f.code_points = code_points;
  f.words = words;
  return f;
}

}  // namespace prefsift::stats
