#include "core/normalize.h"
#include "core/normalize_ascii.h"

#include <gtest/gtest.h>

#include <cctype>
#include <cstdio>
#include <cstring>
#include <random>
#include <sstream>
#include <string>
#include <vector>

namespace prefsift {
namespace {

std::string Utf8(uint32_t cp) {
  std::string s;
  if (cp < 0x80) s += char(cp);
  else if (cp < 0x800) { s += char(0xC0 | (cp >> 6)); s += char(0x80 | (cp & 63)); }
  else if (cp < 0x10000) { s += char(0xE0 | (cp >> 12)); s += char(0x80 | ((cp >> 6) & 63)); s += char(0x80 | (cp & 63)); }
  else { s += char(0xF0 | (cp >> 18)); s += char(0x80 | ((cp >> 12) & 63)); s += char(0x80 | ((cp >> 6) & 63)); s += char(0x80 | (cp & 63)); }
  return s;
}

std::string Field(const std::string& hexes) {
  std::istringstream in(hexes);
  std::string h, out;
  while (in >> h) out += Utf8(static_cast<uint32_t>(std::stoul(h, nullptr, 16)));
  return out;
}

// Conformance against the Unicode Consortium's NormalizationTest.txt (UAX #15,
// shipped by Debian's unicode-data package, Unicode 15.0 like utf8proc 2.8):
// for every line, NFKC(c1) = NFKC(c2) = NFKC(c3) = NFKC(c4) = NFKC(c5) = c4.
TEST(Normalize, NfkcMatchesUnicodeNormalizationTest) {
  const char* path = "/usr/share/unicode/NormalizationTest.txt.bz2";
  std::FILE* probe = std::fopen(path, "rb");
  if (!probe) GTEST_SKIP() << "unicode-data is not installed (" << path << "); scripts/install-deps.sh installs it";
  std::fclose(probe);
  std::FILE* p = popen((std::string("bzcat ") + path).c_str(), "r");
  ASSERT_NE(p, nullptr);
  char buf[4096];
  size_t lines = 0, failures = 0;
  while (std::fgets(buf, sizeof buf, p)) {
    std::string line(buf);
    if (line.empty() || line[0] == '#' || line[0] == '@') continue;
    std::vector<std::string> cols;
    size_t start = 0;
    for (int k = 0; k < 5; ++k) {
      size_t semi = line.find(';', start);
      if (semi == std::string::npos) break;
      cols.push_back(Field(line.substr(start, semi - start)));
      start = semi + 1;
    }
    if (cols.size() != 5) continue;
    ++lines;
    for (const auto& c : cols) {
      if (NfkcOnly(c) != cols[3] && ++failures < 10) ADD_FAILURE() << "NFKC mismatch on line: " << line;
    }
  }
  pclose(p);
  EXPECT_GT(lines, 18000u);  // the 15.0 file has about 19,000 test lines
  EXPECT_EQ(failures, 0u);
}

TEST(Normalize, CaseFoldWidthAndWhitespace) {
  // Full-width letters fold to ASCII (NFKC), case folds, white space folds.
  EXPECT_EQ(NormalizeForMatch("\xEF\xBC\xA6\xEF\xBD\x95\xEF\xBD\x8C\xEF\xBD\x8C  Width"), "full width");
  // U+00DF sharp s case-folds to "ss" (Unicode CaseFolding.txt, status F).
  EXPECT_EQ(NormalizeForMatch("Stra\xC3\x9F" "e"), "strasse");
  // Default-ignorables such as U+200B ZERO WIDTH SPACE are dropped.
  EXPECT_EQ(NormalizeForMatch("ab\xE2\x80\x8B" "c"), "abc");
  // U+3000 IDEOGRAPHIC SPACE is white space (category Zs); NFKC maps it to U+0020.
  EXPECT_EQ(NormalizeForMatch("  a\t\n b\xE3\x80\x80" "c  "), "a b c");
  EXPECT_EQ(NormalizeForMatch(""), "");
}

TEST(Normalize, AsciiFastPathAgreesWithUtf8proc) {
  // The ASCII fast path must give what utf8proc gives; append a non-ASCII
  // character that normalises to itself to force the slow path.
  for (int c = 1; c < 128; ++c) {
    std::string s = "x" + std::string(1, char(c)) + "Y";
    std::string slow = NormalizeForMatch(s + "\xC3\xA9");  // e-acute, NFKC-stable
    std::string fast = NormalizeForMatch(s);
    ASSERT_EQ(fast + "\xC3\xA9", slow) << "byte " << c;
  }
}

TEST(Normalize, AsciiFastPathAgreesOnRandomText) {
  // Random ASCII with runs of white space and punctuation, both punctuation
  // settings. A leading e-acute and a space force the utf8proc path; the
  // general path then gives "e-acute" + " " + the folded text (or the e-acute
  // alone when the text folds to nothing).
  std::mt19937 rng(7);
  const std::string alphabet = "aZq \t\n\r\x0b\x0c  ,.!?'-_()[]{}$+<=>^`|~#%&*/:;@\"\\09";
  for (bool strip : {false, true}) {
    NormalizeOptions o;
    o.strip_punctuation = strip;
    for (int trial = 0; trial < 2000; ++trial) {
      std::string s;
      for (int n = static_cast<int>(rng() % 24); n > 0; --n) s.push_back(alphabet[rng() % alphabet.size()]);
      std::string fast = NormalizeForMatch(s, o);
      std::string slow = NormalizeForMatch("\xC3\xA9 " + s, o);
      ASSERT_EQ(fast.empty() ? "\xC3\xA9" : "\xC3\xA9 " + fast, slow) << "strip " << strip << " text [" << s << "]";
    }
  }
}

TEST(Normalize, AsciiFastPathAgreesOnSinglySpacedText) {
  // Words of printable ASCII joined by single spaces (blocks the ASCII path
  // copies whole), and the same with one spacing fault (a double space, a
  // tab, a line feed, a leading or trailing space) that makes it drop or
  // replace a byte; reference: utf8proc's NFKC + case folding (forced by a
  // leading e-acute).
  std::mt19937 rng(11);
  for (int trial = 0; trial < 3000; ++trial) {
    std::string s;
    for (int w = 1 + static_cast<int>(rng() % 30); w > 0; --w) {
      if (!s.empty()) s.push_back(' ');
      for (int n = 1 + static_cast<int>(rng() % 9); n > 0; --n) s.push_back(static_cast<char>(0x21 + rng() % 94));
    }
    switch (trial % 6) {
      case 1: s.insert(rng() % (s.size() + 1), 1, ' '); break;
      case 2: s.insert(rng() % (s.size() + 1), 1, '\t'); break;
      case 3: s.insert(rng() % (s.size() + 1), 1, '\n'); break;
      case 4: s.insert(0, 1, ' '); break;
      case 5: s.push_back(' '); break;
      default: break;
    }
    std::string fast = NormalizeForMatch(s);
    std::string slow = NormalizeForMatch("\xC3\xA9 " + s);
    ASSERT_EQ("\xC3\xA9 " + fast, slow) << "text [" << s << "]";
  }
}

// Look-alike punctuation (code points from the Unicode charts, General
// Punctuation block U+2000-U+206F): matching text does not depend on which
// quote, apostrophe or dash was typed. The ellipsis U+2026 and full-width
// forms are NFKC compatibility mappings (UnicodeData.txt decomposition).
TEST(Normalize, LookAlikePunctuation) {
  EXPECT_EQ(NormalizeForMatch("Don\u2019t \u201CRenew\u201D \u2013 now\u2026"), "don't \"renew\" - now...");
  EXPECT_EQ(NormalizeForMatch("Don\u2019t \u201CRenew\u201D \u2013 now\u2026"),
            NormalizeForMatch("DON'T \"renew\" - now..."));
  EXPECT_EQ(NormalizeForMatch("a\u2014b\u2212c\u2010d"), "a-b-c-d");
  EXPECT_EQ(NormalizeForMatch("\uFF02quote\uFF02\uFF0E"), "\"quote\".");  // full width
}

TEST(Normalize, PunctuationStripping) {
  NormalizeOptions o;
  o.strip_punctuation = true;
  EXPECT_EQ(NormalizeForMatch("Hello, world! \xC2\xBF" "Qu\xC3\xA9?", o), "hello world qu\xC3\xA9");
  EXPECT_EQ(NormalizeForMatch("don't", o), "dont");
}

TEST(Utf8, RejectsOverlongSurrogatesAndTruncation) {
  EXPECT_TRUE(IsValidUtf8("plain \xE2\x82\xAC \xF0\x9F\x98\x80"));
  EXPECT_FALSE(IsValidUtf8("\xC0\xAF"));          // overlong '/'
  EXPECT_FALSE(IsValidUtf8("\xED\xA0\x80"));      // U+D800, a surrogate
  EXPECT_FALSE(IsValidUtf8("\xF4\x90\x80\x80"));  // above U+10FFFF
  EXPECT_FALSE(IsValidUtf8("\xE2\x82"));          // truncated
  EXPECT_FALSE(IsValidUtf8("\xFF"));
}

// The ASCII test runs 64 bytes a step: one non-ASCII letter at any place of
// a text must still take the Unicode path. U+00C9 case-folds to U+00E9
// (Unicode CaseFolding.txt, "00C9; C; 00E9"), which the ASCII path would not do.
TEST(NormalizeForMatch, OneNonAsciiLetterAnywhereTakesTheUnicodePath) {
  for (size_t at = 0; at < 200; ++at) {
    const std::string text = std::string(at, 'A') + "\xC3\x89" + std::string(at % 70, 'B');
    const std::string want = std::string(at, 'a') + "\xC3\xA9" + std::string(at % 70, 'b');
    ASSERT_EQ(NormalizeForMatch(text), want) << at;
  }
}

// NormalizeForMatchInto gives NormalizeForMatch's bytes whatever the buffer
// held before (longer, shorter, empty), for both options.
TEST(NormalizeForMatch, IntoAReusedBufferGivesTheSameText) {
  const std::vector<std::string> texts = {
      "", "  Hello,   WORLD!\t", "plain text", std::string(300, 'X') + " y", "Caf\xC3\xA9 \xE2\x80\x9Cquoted\xE2\x80\x9D",
      "a\n\nb", "ALL  CAPS  --  dash", "\xEF\xBC\xA1\xEF\xBC\xA2"};
  for (bool strip : {false, true}) {
    NormalizeOptions o;
    o.strip_punctuation = strip;
    std::string buffer = std::string(1000, 'z');
    for (int round = 0; round < 2; ++round) {
      for (const std::string& t : texts) {
        NormalizeForMatchInto(t, o, &buffer);
        ASSERT_EQ(buffer, NormalizeForMatch(t, o)) << t;
      }
    }
  }
}

// The masks of the ASCII block path name exactly the bytes the general
// path's predicates call white space and punctuation: every byte below 0x80
// at every place of a block (the other bytes 'a', in neither class).
TEST(NormalizeAscii, BlockMasksAgreeWithThePredicatesOnEveryByte) {
  for (int c = 0; c < 128; ++c) {
    for (int at = 0; at < 64; ++at) {
      unsigned char block[64];
      std::memset(block, 'a', sizeof block);
      block[at] = static_cast<unsigned char>(c);
      const uint64_t bit = uint64_t{1} << at;
      ASSERT_EQ(detail::AsciiSpaceMask(block), detail::IsSpaceCodepoint(c) ? bit : 0) << "byte " << c << " at " << at;
      ASSERT_EQ(detail::AsciiPunctMask(block), detail::IsPunctCodepoint(c) ? bit : 0) << "byte " << c << " at " << at;
    }
  }
}

// Differential test of the ASCII block path (detail::FoldAscii) against the
// per-byte loop it replaced (detail::FoldAsciiReference, the project's own
// reference; why that loop is exact for ASCII is said in
// NormalizeForMatchInto's comment, core/normalize.cc).
void ExpectFoldsAgree(const std::string& text, bool strip, std::string* buffer) {
  std::string want;
  detail::FoldAsciiReference(text, strip, &want);
  detail::FoldAscii(text, strip, buffer);
  ASSERT_EQ(*buffer, want) << "strip " << strip << " text [" << text << "] (" << text.size() << " bytes)";
}

TEST(NormalizeAscii, BlockPathAgreesWithTheByteLoopOnEdgeCases) {
  std::vector<std::string> texts = {
      "", " ", "\n", " \t\r\n\v\f ", ",", " , ", "a", "A", "a , b", "a ,b", "a, b", "a,b", ", a ,", " a ", "a  b",
      "a\n\nb", "a \n b", "Hello, World!", "(a) [b] {c}", "x$y+z<w>v^u`t|s~r", "--a--", "a -- b", "a-b",
      "'quoted' \"twice\"", "end.", ".start", "a\r\nb\r\n", "#1: @me_you", "A\tB\vC\fD"};
  // Gaps, words and punctuation at and across the block edges (63, 64, 65,
  // 127, 128 ...): leading, trailing and lone gaps of every length there.
  for (size_t len : {1, 2, 62, 63, 64, 65, 66, 127, 128, 129, 191, 192, 193}) {
    for (const char* fill : {"A", " ", "\n", ",", " ,", ", ", "a ", " a", "a,", "ab, "}) {
      std::string t;
      while (t.size() < len) t += fill;
      t.resize(len);
      texts.push_back(t);
      texts.push_back(" " + t);
      texts.push_back(t + " ");
      texts.push_back("x" + t + "y");
      texts.push_back(std::string(len, 'Q') + fill + "z");
    }
  }
  std::string buffer;
  for (bool strip : {false, true}) {
    for (const std::string& t : texts) {
      ExpectFoldsAgree(t, strip, &buffer);
      if (HasFatalFailure()) return;
    }
  }
  // Hand-checked results, beside the agreement.
  std::string out;
  detail::FoldAscii("a , b", true, &out);
  EXPECT_EQ(out, "a b");
  detail::FoldAscii("a , b", false, &out);
  EXPECT_EQ(out, "a , b");
  detail::FoldAscii(" ,A,\n\n,B, ", true, &out);
  EXPECT_EQ(out, "a b");
  detail::FoldAscii("a,,b", true, &out);
  EXPECT_EQ(out, "ab");
}

TEST(NormalizeAscii, BlockPathAgreesWithTheByteLoopOnRandomText) {
  // Biased toward what the block path treats apart: white space of each
  // kind (runs of it), punctuation and symbols, capitals; lengths 0..300
  // cross up to four block edges. A reused buffer, as pass 1 uses it.
  const std::string letters = "abcxyzABCXYZ0189";
  const std::string spaces = " \t\n\r\x0b\x0c";
  std::string punct_and_symbols;
  for (int c = 0x21; c < 0x7F; ++c) {
    if (!std::isalnum(c)) punct_and_symbols.push_back(static_cast<char>(c));
  }
  std::mt19937 rng(20261203);
  std::string buffer;
  for (int trial = 0; trial < 20000; ++trial) {
    const size_t len = rng() % 301;
    // Each text has its own mix, from almost all letters to almost all gaps.
    const unsigned space_pct = rng() % 60, punct_pct = rng() % 40;
    std::string t;
    while (t.size() < len) {
      const unsigned r = rng() % 100;
      if (r < space_pct) {
        for (unsigned run = 1 + rng() % 3; run > 0; --run) t.push_back(spaces[rng() % spaces.size()]);
      } else if (r < space_pct + punct_pct) {
        t.push_back(punct_and_symbols[rng() % punct_and_symbols.size()]);
      } else if (r % 7 == 0) {
        t.push_back(static_cast<char>(rng() % 128));  // any ASCII byte, controls too
      } else {
        t.push_back(letters[rng() % letters.size()]);
      }
    }
    t.resize(len);
    for (bool strip : {false, true}) ExpectFoldsAgree(t, strip, &buffer);
    if (HasFatalFailure()) return;
  }
}

}  // namespace
}  // namespace prefsift
