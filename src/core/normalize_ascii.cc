#include "core/normalize_ascii.h"

#include <cstring>

#include "core/byte_block.h"

namespace prefsift::detail {
namespace {

// ASCII white space for matching: TAB LF VT FF CR (one range) and SPACE
// (IsSpaceCodepoint; its U+0085 is not ASCII).
constexpr unsigned char kSpaceLo = 0x09, kSpaceHi = 0x0D;

uint64_t SpaceMask(const Block64& b) { return b.InRange(kSpaceLo, kSpaceHi) | b.Eq(' '); }

// ASCII punctuation (Unicode categories Pc Pd Ps Pe Pi Pf Po):
// !"# %&'()* ,-./ :; ?@ [\] _ { }. The other printable non-alphanumerics
// ($ + < = > ^ ` | ~) are symbols (S*), kept.
uint64_t PunctMask(const Block64& b) {
  return b.InRange(0x21, 0x23) | b.InRange(0x25, 0x2A) | b.InRange(0x2C, 0x2F) | b.InRange(0x3A, 0x3B) |
         b.InRange(0x3F, 0x40) | b.InRange(0x5B, 0x5D) | b.Eq(0x5F) | b.Eq(0x7B) | b.Eq(0x7D);
}

// The 64 bytes at p as they may be written: ASCII lowercase, white space as
// ' ' (only the first white space byte of a gap is ever written). A plain
// loop, which the compiler vectorises; its arithmetic stays in bytes, else
// the vectors are widened to 32-bit lanes and back.
void LowerBlock(const unsigned char* p, unsigned char* low) {
  for (int k = 0; k < 64; ++k) {
    const uint8_t c = p[k];
    const bool upper = static_cast<uint8_t>(c - 'A') < uint8_t{26};
    const bool space = static_cast<uint8_t>(c - kSpaceLo) <= uint8_t{kSpaceHi - kSpaceLo};
    low[k] = space ? uint8_t{' '} : static_cast<uint8_t>(c + (upper ? 32 : 0));
  }
}

// Byte classes of ASCII for the reference loop, from the general path's
// predicates.
struct AsciiClasses {
  bool space[128];
  bool punct[128];
  AsciiClasses() {
    for (int c = 0; c < 128; ++c) {
      space[c] = IsSpaceCodepoint(c);
      punct[c] = IsPunctCodepoint(c);
    }
  }
};

}  // namespace

uint64_t AsciiSpaceMask(const unsigned char* p) { return SpaceMask(Block64(p)); }
uint64_t AsciiPunctMask(const unsigned char* p) { return PunctMask(Block64(p)); }

namespace {

// Each block's bytes are kept (neither white space nor punctuation being
// stripped), dropped, or written as the ' ' of a gap: the first white space
// byte after a kept byte, when only stripped punctuation lies between them.
// A ' ' written last had no kept byte after it and is taken back at the end.
// That is the reference loop's pending_space: a gap between two kept bytes
// with any white space in it gives one ' '; a gap at either end gives none.
template <bool kStripPunct>
void FoldAsciiBlocks(std::string_view text, std::string* out_text) {
  std::string& out = *out_text;
  // Runs are copied 16 bytes at a time, so a copy may write up to 15 bytes
  // past its run. The output is never longer than the input so far (a ' '
  // stands for at least one white space byte), so text.size() + 16 bytes
  // hold every write.
  constexpr size_t kSlack = 16;
  out.resize(text.size() + kSlack);
  char* const begin = out.data();
  char* o = begin;
  // Whether the last byte before the block that is not stripped punctuation
  // was kept (false at the start: a gap there writes no ' ').
  uint64_t after_kept = 0;
  alignas(16) unsigned char low[64 + kSlack] = {};
  ForEachBlock64(text, 0, [&](const unsigned char* p, size_t, uint64_t valid) {
    const Block64 b(p);
    const uint64_t space = SpaceMask(b) & valid;
    const uint64_t punct = kStripPunct ? PunctMask(b) & valid : 0;
    const uint64_t kept = valid & ~space & ~punct;
    // Bit k: the last byte before k that is not stripped punctuation is kept.
    // A run of punctuation carries the bit before it through itself and on
    // to the byte after it (the add carries along the run).
    const uint64_t after_own = kept << 1 | after_kept;
    const uint64_t after = after_own | ((punct + (after_own & punct)) ^ punct);
    const uint64_t write = kept | (space & after);
    const uint64_t not_punct = valid & ~punct;
    if (not_punct != 0) after_kept = (kept >> (63 - __builtin_clzll(not_punct))) & 1;
    LowerBlock(p, low);
    if (write == ~uint64_t{0}) {
      std::memcpy(o, low, 64);
      o += 64;
      return;
    }
    for (uint64_t rest = write; rest != 0;) {
      const unsigned start = static_cast<unsigned>(__builtin_ctzll(rest));
      // The run's length: rest has a 0 above it (it is not all ones here).
      const unsigned len = static_cast<unsigned>(__builtin_ctzll(~(rest >> start)));
      for (unsigned i = 0; i < len; i += 16) std::memcpy(o + i, low + start + i, 16);
      o += len;
      rest &= rest + (rest & (~rest + 1));  // clears the lowest run
    }
  });
  if (o != begin && o[-1] == ' ') --o;
  out.resize(static_cast<size_t>(o - begin));
}

}  // namespace

void FoldAscii(std::string_view text, bool strip_punct, std::string* out) {
  // One instance a setting: keeping punctuation, the punctuation mask and
  // its carries are gone at compile time.
  if (strip_punct) {
    FoldAsciiBlocks<true>(text, out);
  } else {
    FoldAsciiBlocks<false>(text, out);
  }
}

// The per-byte loop: a white space byte makes a ' ' pending once anything is
// written; a kept byte writes the pending ' ' and itself; stripped
// punctuation changes nothing.
void FoldAsciiReference(std::string_view text, bool strip_punct, std::string* out_text) {
  static const AsciiClasses k;
  std::string& out = *out_text;
  out.resize(text.size());
  char* o = out.data();
  char* const begin = o;
  bool pending_space = false;
  for (char ch : text) {
    auto c = static_cast<unsigned char>(ch);
    if (k.space[c]) {
      pending_space = o != begin;
    } else if (strip_punct && k.punct[c]) {
      // dropped
    } else {
      if (pending_space) *o++ = ' ';
      pending_space = false;
      *o++ = (c >= 'A' && c <= 'Z') ? static_cast<char>(c - 'A' + 'a') : ch;
    }
  }
  out.resize(static_cast<size_t>(o - begin));
}

}  // namespace prefsift::detail
