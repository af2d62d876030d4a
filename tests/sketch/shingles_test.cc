// Tests for sketch/shingles.h.
//
// Outside reference: tests/sketch/data/{texts,pairs}.tsv, written by
// tests/sketch/reference/make_shingle_fixture.py with Python's stdlib (str is a
// sequence of code points; script membership from unicodedata character
// names). UTF-8 byte sequences are from RFC 3629 (section 3 table and
// section 7 examples).
#include "sketch/shingles.h"

#include <gtest/gtest.h>

#include <cstdio>
#include <fstream>
#include <map>
#include <random>
#include <sstream>
#include <string>
#include <utility>
#include <vector>

#include "sketch/set_similarity.h"
#include "adversarial_text.h"
#include "sketch/word_scan_path.h"
#include "sketch/xxh3_small.h"

namespace prefsift::sketch {
namespace {

std::vector<std::vector<std::string>> ReadTsv(const std::string& name) {
  std::ifstream in(std::string(SKETCH_TEST_DATA_DIR) + "/" + name);
  EXPECT_TRUE(in.good()) << name;
  std::vector<std::vector<std::string>> rows;
  std::string line;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#') continue;
    std::vector<std::string> fields;
    size_t start = 0;
    while (true) {
      const size_t tab = line.find('\t', start);
      fields.push_back(line.substr(start, tab == std::string::npos ? std::string::npos : tab - start));
      if (tab == std::string::npos) break;
      start = tab + 1;
    }
    rows.push_back(fields);
  }
  return rows;
}

// UAX #29 word boundaries, checked against the Unicode Consortium's
// WordBreakTest.txt (Unicode 15.0, Debian's unicode-data package,
// /usr/share/unicode/auxiliary/WordBreakTest.txt). Each line gives code
// points with the boundaries between them and, in its comment, each code
// point's Word_Break property. We implement the rules for the properties
// below (docs/normalisation.md); lines with any other property (Hebrew_Letter,
// Katakana, CR, LF, Newline, ZWJ, ExtPict, RI) are skipped and counted. For
// every checked line, our word segments equal the file's segments that hold an
// ALetter or Numeric code point, and our class of every code point agrees
// with the file's property.
TEST(Words, MatchWordBreakTestForSupportedProperties) {
  std::ifstream in("/usr/share/unicode/auxiliary/WordBreakTest.txt");
  if (!in.good()) GTEST_SKIP() << "unicode-data's WordBreakTest.txt is not installed";
  const std::map<std::string, WordClass> supported = {
      {"ALetter", WordClass::kLetter},        {"Numeric", WordClass::kNumeric},
      {"MidLetter", WordClass::kMidLetter},   {"MidNum", WordClass::kMidNum},
      {"MidNumLet", WordClass::kMidNumLet},   {"Single_Quote", WordClass::kMidNumLet},
      {"ExtendNumLet", WordClass::kExtendNumLet}, {"Extend_FE", WordClass::kExtend},
      {"Format_FE", WordClass::kExtend},      {"Other", WordClass::kOther},
      {"Double_Quote", WordClass::kOther},    {"WSegSpace", WordClass::kSpace}};
  size_t checked = 0, skipped = 0;
  std::string line;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#') continue;
    const size_t hash = line.find('#');
    const std::string rule = line.substr(0, hash), comment = line.substr(hash);
    std::vector<std::string> props;
    for (size_t p = comment.find('('); p != std::string::npos; p = comment.find('(', p + 1)) {
      props.push_back(comment.substr(p + 1, comment.find(')', p) - p - 1));
    }
    // Segments: code points between "÷" marks; "×" joins.
    std::vector<std::vector<char32_t>> segments(1);
    std::vector<char32_t> cps;
    std::istringstream tok(rule);
    std::string t;
    while (tok >> t) {
      if (t == "\xC3\xB7") {
        if (!segments.back().empty()) segments.emplace_back();
      } else if (t != "\xC3\x97") {
        cps.push_back(static_cast<char32_t>(std::stoul(t, nullptr, 16)));
        segments.back().push_back(cps.back());
      }
    }
    bool ok = props.size() == cps.size();
    for (size_t k = 0; ok && k < cps.size(); ++k) {
      auto it = supported.find(props[k]);
      ok = it != supported.end() && WordClassOf(cps[k]) == it->second;
    }
    if (!ok) {
      ++skipped;
      continue;
    }
    auto utf8 = [](const std::vector<char32_t>& v) {
      std::string s;
      for (char32_t cp : v) {
        if (cp < 0x80) s.push_back(static_cast<char>(cp));
        else if (cp < 0x800) { s.push_back(char(0xC0 | (cp >> 6))); s.push_back(char(0x80 | (cp & 0x3F))); }
        else if (cp < 0x10000) { s.push_back(char(0xE0 | (cp >> 12))); s.push_back(char(0x80 | ((cp >> 6) & 0x3F))); s.push_back(char(0x80 | (cp & 0x3F))); }
        else { s.push_back(char(0xF0 | (cp >> 18))); s.push_back(char(0x80 | ((cp >> 12) & 0x3F))); s.push_back(char(0x80 | ((cp >> 6) & 0x3F))); s.push_back(char(0x80 | (cp & 0x3F))); }
      }
      return s;
    };
    std::vector<std::string> expected;
    for (const auto& seg : segments) {
      bool word = false;
      for (char32_t cp : seg) word = word || WordClassOf(cp) == WordClass::kLetter || WordClassOf(cp) == WordClass::kNumeric;
      if (word) expected.push_back(utf8(seg));
    }
    const std::string text = utf8(cps);
    std::vector<std::string> got;
    for (auto w : Words(text)) got.emplace_back(w);
    EXPECT_EQ(got, expected) << line;
    EXPECT_EQ(CountWords(text), expected.size()) << line;
    ++checked;
  }
  // 999 of the file's 1,823 lines use only the supported properties (Unicode 15.0).
  EXPECT_GE(checked, 999u) << "skipped " << skipped;
  std::printf("WordBreakTest.txt: %zu lines checked, %zu skipped (unsupported properties)\n", checked, skipped);
}

TEST(Words, PunctuationSpacingDoesNotChangeWords) {
  // Our own examples: the spacing of punctuation and its presence between
  // words do not change the words.
  EXPECT_EQ(Words("nothing changed ."), Words("nothing changed."));
  EXPECT_EQ(Words("yes , we tried ! twice"), Words("yes, we tried! twice"));
  const auto w = Words("don't stop: 3.5 kg, e.g. the_end");
  ASSERT_EQ(w.size(), 6u);
  EXPECT_EQ(w[0], "don't");
  EXPECT_EQ(w[3], "kg");
  EXPECT_EQ(w[2], "3.5");
  EXPECT_EQ(w[4], "e.g");
  EXPECT_EQ(w[5], "the_end");
}

TEST(Words, SplitsOnAsciiWhitespace) {
  const auto w = Words("  alpha beta\tgamma\n delta  ");
  ASSERT_EQ(w.size(), 4u);
  EXPECT_EQ(w[0], "alpha");
  EXPECT_EQ(w[3], "delta");
  EXPECT_EQ(CountWords("  alpha beta\tgamma\n delta  "), 4u);
  EXPECT_EQ(CountWords(""), 0u);
  EXPECT_EQ(CountWords("   "), 0u);
}

using detail::WordScanPath;

// Forces one word-scan path for a scope, then goes back to the widest.
class ScopedWordScanPath {
 public:
  explicit ScopedWordScanPath(WordScanPath path) { detail::ForceWordScanPath(path); }
  ~ScopedWordScanPath() { detail::ResetWordScanPath(); }
  ScopedWordScanPath(const ScopedWordScanPath&) = delete;
  ScopedWordScanPath& operator=(const ScopedWordScanPath&) = delete;
};

// What a path makes of a text: each word's byte range, the word count, and
// the word 3-gram keys and 5-gram hashes (each caller inlines the scan, so
// each is checked).
struct WordScan {
  std::vector<std::pair<size_t, size_t>> words;
  size_t count = 0;
  std::vector<uint64_t> keys, hashes;
  bool operator==(const WordScan&) const = default;
};

WordScan ScanWith(WordScanPath path, const std::string& text) {
  ScopedWordScanPath forced(path);
  WordScan scan;
  for (std::string_view w : Words(text)) {
    const auto start = static_cast<size_t>(w.data() - text.data());
    scan.words.emplace_back(start, start + w.size());
  }
  scan.count = CountWords(text);
  AppendWordGramKeys(text, 3, &scan.keys);
  ShingleOptions options;
  options.mode = ShingleMode::kWords;
  AppendShingles(text, options, &scan.hashes);
  return scan;
}

std::string Describe(const WordScan& scan) {
  std::string out = std::to_string(scan.count) + " words:";
  for (const auto& [start, end] : scan.words) out += " [" + std::to_string(start) + "," + std::to_string(end) + ")";
  return out;
}

// Every path this CPU runs against the general loop (WordScanPath::kGeneral)
// on `text`: the same words at the same byte offsets, count, keys and hashes.
void ExpectEveryPathAgrees(const std::string& text) {
  const WordScan general = ScanWith(WordScanPath::kGeneral, text);
  ASSERT_EQ(general.count, general.words.size());
  for (WordScanPath path : detail::AvailableWordScanPaths()) {
    if (path == WordScanPath::kGeneral) continue;
    const WordScan scan = ScanWith(path, text);
    ASSERT_TRUE(scan == general) << detail::WordScanPathName(path) << " on [" << text << "] (" << text.size()
                                 << " bytes): " << Describe(scan) << "; general loop: " << Describe(general);
  }
}

// Random ASCII text dense in the bytes that decide ASCII words: letters,
// digits, '_', the MidLetter/MidNumLet/MidNum bytes ' . : , ; and spaces,
// with other punctuation and control bytes.
std::string RandomAsciiWordText(std::mt19937_64& rng, size_t length) {
  static const std::string kAlphabet =
      "abcdefxyzQRSTUVW0123456789__.....'''::,,;;     \t\n-!?\"()/@#$%&*+=<>[]{}|~^`\\\x01\x7f";
  std::string s;
  s.reserve(length);
  while (s.size() < length) {
    const uint64_t r = rng();
    if (r % 8 == 0) {  // a run of one byte, so words and joins also cross 64-byte blocks
      const char c = kAlphabet[(r >> 8) % kAlphabet.size()];
      s.append(std::min<size_t>(length - s.size(), 1 + (r >> 32) % 70), c);
    } else {
      s.push_back(kAlphabet[(r >> 8) % kAlphabet.size()]);
    }
  }
  return s;
}

// The ASCII paths build 64-byte bit masks (SSE2, AVX2 or AVX-512BW chosen at
// run time; a byte-at-a-time build of the same masks) instead of the general
// UTF-8 loop's branch a byte. This check is differential: each path this CPU
// runs against the project's general loop (ForEachWordFrom in shingles.cc,
// the UAX #29 word-boundary rules that the WordBreakTest.txt check above
// covers), on seeded random text at every length up to 300 bytes (every
// place in a block, texts ending mid-block, up to 5 blocks) and some long
// ones, with words and joiners across block edges.
TEST(Words, AsciiMaskPathAgreesWithTheGeneralLoop) {
  std::mt19937_64 rng(20261203);
  for (size_t length = 0; length <= 300; ++length) {
    for (int trial = 0; trial < 60; ++trial) ExpectEveryPathAgrees(RandomAsciiWordText(rng, length));
  }
  for (size_t length : {511u, 512u, 513u, 1000u, 4095u, 4096u, 4097u, 20000u}) {
    for (int trial = 0; trial < 5; ++trial) ExpectEveryPathAgrees(RandomAsciiWordText(rng, length));
  }
  // Whole blocks of one byte: a word, a number or a run of '_' across blocks.
  for (const char c : std::string("a7_.' ")) {
    for (size_t length : {63u, 64u, 65u, 128u, 129u}) {
      ExpectEveryPathAgrees(std::string(length, c));
      ExpectEveryPathAgrees(std::string(length, c) + "x");
      ExpectEveryPathAgrees("_" + std::string(length, c) + "_");
    }
  }
}

// Text with bytes >= 0x80: the mask paths stop before the block ahead of
// the first such byte and the general loop goes on from a word boundary
// there; the words must be the general loop's alone. Random ASCII with
// non-ASCII pieces (letters, an Extend mark, an ideograph, U+2019 which joins
// letters, a malformed byte) at random places, and tests/adversarial_text.h's
// texts. Differential against the general loop, as above.
TEST(Words, MaskPathHandsNonAsciiTextToTheGeneralLoop) {
  static const std::vector<std::string> kPieces = {"\xC3\xA9", "\xCC\x81", "\xE4\xB8\x80", "\xE2\x80\x99",
                                                   "\xFF", "\xC3", "\xE0\xB8\x81"};
  std::mt19937_64 rng(20261204);
  for (size_t length = 0; length <= 300; ++length) {
    for (int trial = 0; trial < 20; ++trial) {
      std::string s = RandomAsciiWordText(rng, length);
      const size_t at = rng() % (s.size() + 1);
      s.insert(at, kPieces[rng() % kPieces.size()]);
      ExpectEveryPathAgrees(s);
    }
  }
  for (size_t length : testing::AdversarialLengths()) {
    for (int trial = 0; trial < 3; ++trial) ExpectEveryPathAgrees(testing::AdversarialText(rng, length));
  }
}

// RFC 3629 section 7: "\x41\xE2\x89\xA2\xCE\x91\x2E" is U+0041 U+2262 U+0391 U+002E;
// "\xED\x95\x9C\xEA\xB5\xAD\xEC\x96\xB4" is U+D55C U+AD6D U+C5B4;
// "\xEF\xBB\xBF\xF0\xA3\x8E\xB4" is U+FEFF U+233B4.
TEST(DecodeUtf8, Rfc3629Examples) {
  EXPECT_EQ(DecodeUtf8("\x41\xE2\x89\xA2\xCE\x91\x2E"),
            (std::vector<char32_t>{0x41, 0x2262, 0x391, 0x2E}));
  EXPECT_EQ(DecodeUtf8("\xED\x95\x9C\xEA\xB5\xAD\xEC\x96\xB4"),
            (std::vector<char32_t>{0xD55C, 0xAD6D, 0xC5B4}));
  EXPECT_EQ(DecodeUtf8("\xEF\xBB\xBF\xF0\xA3\x8E\xB4"), (std::vector<char32_t>{0xFEFF, 0x233B4}));
}

// RFC 3629 section 3: overlong forms, surrogates (U+D800..U+DFFF) and values
// above U+10FFFF are invalid. Our policy (ours, not the RFC's): one U+FFFD per
// rejected byte, then resynchronise.
TEST(DecodeUtf8, MalformedBytesBecomeReplacementCharacter) {
  EXPECT_EQ(DecodeUtf8("\xC0\xAF"), (std::vector<char32_t>{0xFFFD, 0xFFFD}));  // overlong '/'
  EXPECT_EQ(DecodeUtf8("\xED\xA0\x80"), (std::vector<char32_t>{0xFFFD, 0xFFFD, 0xFFFD}));  // U+D800
  EXPECT_EQ(DecodeUtf8("\xF4\x90\x80\x80").front(), char32_t{0xFFFD});  // > U+10FFFF
  EXPECT_EQ(DecodeUtf8("a\xE2\x82"), (std::vector<char32_t>{'a', 0xFFFD, 0xFFFD}));  // truncated
}

TEST(ScriptDetection, MatchesUnicodeNamesFromPython) {
  const auto rows = ReadTsv("texts.tsv");
  ASSERT_GE(rows.size(), 20u);
  for (const auto& row : rows) {
    const std::string text = row.size() > 4 ? row[4] : "";
    SCOPED_TRACE(text);
    EXPECT_EQ(CountWords(text), std::stoul(row[1]));
    EXPECT_EQ(DecodeUtf8(text).size(), std::stoul(row[2]));
    EXPECT_NEAR(NoSpaceScriptShare(text), std::stod(row[3]), 1e-6);
  }
}

TEST(ScriptDetection, AutoModeFollowsShare) {
  const ShingleOptions opts;
  EXPECT_EQ(ResolveMode("the cat sat on the mat", opts), ShingleMode::kWords);
  EXPECT_EQ(ResolveMode("我们今天去公园散步", opts), ShingleMode::kChars);
  EXPECT_EQ(ResolveMode("วันนี้อากาศดีมาก", opts), ShingleMode::kChars);
  EXPECT_EQ(ResolveMode("오늘은 날씨가 좋아서", opts), ShingleMode::kChars);
  // One Han character among many Latin ones stays in word mode.
  EXPECT_EQ(ResolveMode("the word for water is 水 in chinese", opts), ShingleMode::kWords);
  ShingleOptions forced;
  forced.mode = ShingleMode::kWords;
  EXPECT_EQ(ResolveMode("我们今天去公园散步", forced), ShingleMode::kWords);
}

// Exact Jaccard of our hashed shingle sets equals Python's Jaccard of the
// actual n-gram sets (word 5-grams; code-point 5-grams), for every pair.
TEST(Shingles, JaccardMatchesPythonReference) {
  const auto texts = ReadTsv("texts.tsv");
  const auto pairs = ReadTsv("pairs.tsv");
  ASSERT_GT(pairs.size(), 400u);
  std::vector<std::string> text;
  for (const auto& row : texts) text.push_back(row.size() > 4 ? row[4] : "");
  ShingleOptions words;
  words.mode = ShingleMode::kWords;
  ShingleOptions chars;
  chars.mode = ShingleMode::kChars;
  std::vector<std::vector<uint64_t>> w;
  std::vector<std::vector<uint64_t>> c;
  for (const auto& t : text) {
    w.push_back(Shingles(t, words));
    c.push_back(Shingles(t, chars));
    EXPECT_EQ(w.back(), WordNgramHashes(t, 5, words.seed));
    EXPECT_EQ(c.back(), CharNgramHashes(t, 5, chars.seed));
  }
  for (const auto& row : pairs) {
    const size_t i = std::stoul(row[0]);
    const size_t j = std::stoul(row[1]);
    SCOPED_TRACE(text[i] + " | " + text[j]);
    EXPECT_NEAR(ExactJaccard(w[i], w[j]), std::stod(row[2]), 1e-6);
    EXPECT_NEAR(ExactJaccard(c[i], c[j]), std::stod(row[3]), 1e-6);
  }
}

TEST(Shingles, CharacterModeOnCjkCountsCodePointGrams) {
  // 9 distinct Han characters -> 9 - 5 + 1 = 5 distinct code-point 5-grams.
  const std::string text = "我们今天去公园散步";
  ShingleOptions opts;  // auto -> chars
  EXPECT_EQ(Shingles(text, opts).size(), 5u);
  // Word mode splits each Han character off as a word of its own (UAX #29
  // leaves ideographs unjoined, rule WB999): the same 5 grams, over words.
  opts.mode = ShingleMode::kWords;
  EXPECT_EQ(Shingles(text, opts).size(), 5u);
}

TEST(Shingles, ShortTextIsOneShingle) {
  ShingleOptions opts;
  EXPECT_EQ(Shingles("just four words here", opts).size(), 1u);
  EXPECT_EQ(Shingles("", opts).size(), 1u);
  EXPECT_EQ(Shingles("one two three four five", opts).size(), 1u);
  EXPECT_EQ(Shingles("one two three four five six", opts).size(), 2u);
  // Whitespace runs do not change the words, so not the shingles.
  EXPECT_EQ(Shingles("one two  three\tfour five six", opts), Shingles("one two three four five six", opts));
  EXPECT_NE(Shingles("just four words here", opts), Shingles("just four words there", opts));
}

TEST(Shingles, NgramSizeIsAParameter) {
  std::string text;
  for (int i = 0; i < 30; ++i) text += "w" + std::to_string(i) + " ";
  EXPECT_EQ(WordNgramHashes(text, 13, 1).size(), 30u - 13u + 1u);
  EXPECT_EQ(WordNgramHashes(text, 1, 1).size(), 30u);
  EXPECT_NE(WordNgramHashes(text, 13, 1), WordNgramHashes(text, 13, 2));  // seed matters
}

// AppendWordGramKeys (the near-identical candidate check's cheaper keys) must
// make the same sets as AppendShingles' word mode: across a pool of texts,
// two n-grams share a key exactly when they share an XXH3 shingle hash (the
// reference), so every set size and intersection, and so every Jaccard, is
// the same. Words of 1-20 bytes (both sides of the 7/8-byte packing edge),
// repeats, non-ASCII words, texts shorter than n words, the empty text, and
// words at the very end of the buffer (no 8 readable bytes after them).
TEST(Shingles, GramKeysPartitionNgramsLikeTheHashes) {
  std::mt19937 rng(20261204);
  const std::vector<std::string> vocab = {"a", "ab", "abc", "abcdefg", "abcdefgh", "abcdefghi", "abcdefghijklmnop",
                                          "abcdefghijklmnopqrst", "b", "ba", "gfedcba", "hgfedcba", "x1", "x_1",
                                          "don't", "3.5", "\xC3\xA9t\xC3\xA9", "na\xC3\xAFve", "zz", "zzzzzzz"};
  for (int n : {1, 2, 3, 5}) {
    std::vector<std::string> texts;
    for (int t = 0; t < 400; ++t) {
      std::string s;
      const int words = static_cast<int>(rng() % 12);
      for (int w = 0; w < words; ++w) {
        if (w) s += rng() % 5 == 0 ? " , " : " ";
        s += vocab[rng() % vocab.size()];
      }
      texts.push_back(s);
    }
    texts.push_back("");
    texts.push_back("!!! ...");
    ShingleOptions so;
    so.mode = ShingleMode::kWords;
    so.word_n = n;
    std::map<uint64_t, uint64_t> key_of_hash, hash_of_key;
    for (const std::string& text : texts) {
      const std::string exact(text);  // its own buffer: the last word ends the allocation's text
      std::vector<uint64_t> hashes, keys;
      AppendShingles(exact, so, &hashes);
      AppendWordGramKeys(exact, n, &keys);
      ASSERT_EQ(keys.size(), hashes.size()) << "n=" << n << " [" << text << "]";
      for (size_t i = 0; i < keys.size(); ++i) {
        auto [h, h_new] = key_of_hash.emplace(hashes[i], keys[i]);
        auto [k, k_new] = hash_of_key.emplace(keys[i], hashes[i]);
        ASSERT_EQ(h->second, keys[i]) << "one shingle, two keys: n=" << n << " [" << text << "]";
        ASSERT_EQ(k->second, hashes[i]) << "two shingles, one key: n=" << n << " [" << text << "]";
      }
    }
    EXPECT_GT(key_of_hash.size(), n == 1 ? 20u : 100u);  // n = 1: the 20 words and the empty text
  }
}


// AppendWordGramKeys unrolls the chaining for n = 3 and 5; its keys must be
// the plain loop's (AppendWordGramKeysReference) for every n, on adversarial
// texts (random bytes, malformed UTF-8, runs of punctuation) and on plain
// word texts, appended after keys already in the vector.
TEST(Shingles, GramKeysMatchTheirReference) {
  std::mt19937_64 rng(20261203);
  std::vector<std::string> texts;
  for (size_t len : prefsift::testing::AdversarialLengths()) texts.push_back(prefsift::testing::AdversarialText(rng, len));
  for (int t = 0; t < 50; ++t) {
    std::string s;
    for (int w = 0; w < t * 7; ++w) {
      s += 'w';
      s += std::to_string(rng() % 40);
      s += rng() % 4 ? " " : ". ";
    }
    texts.push_back(s);
  }
  for (int n = 1; n <= 7; ++n) {
    for (const std::string& text : texts) {
      std::vector<uint64_t> fast = {1, 2}, ref = {1, 2};
      AppendWordGramKeys(text, n, &fast);
      AppendWordGramKeysReference(text, n, &ref);
      ASSERT_EQ(fast, ref) << "n=" << n << " length " << text.size();
    }
  }
}


// Xxh3Seeded (the shingler's inlined XXH3) must equal XXH3_64bits_withSeed,
// its reference, at every length up to 300 bytes (each of its paths and both
// edges of each), at every alignment of the input, for several seeds.
TEST(Shingles, InlinedXxh3MatchesTheLibrary) {
  std::mt19937_64 rng(20261203);
  std::vector<unsigned char> bytes(320 + 8);
  for (auto& b : bytes) b = static_cast<unsigned char>(rng());
  for (uint64_t seed : {uint64_t{0}, uint64_t{1}, uint64_t{0x70726566}, rng(), ~uint64_t{0}}) {
    for (size_t len = 0; len <= 300; ++len) {
      for (size_t off = 0; off < 8; ++off) {
        ASSERT_EQ(Xxh3Seeded(bytes.data() + off, len, seed), XXH3_64bits_withSeed(bytes.data() + off, len, seed))
            << "length " << len << " offset " << off;
      }
    }
  }
}

}  // namespace
}  // namespace prefsift::sketch
