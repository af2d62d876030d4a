// Tests for sketch/shingles.h.
//
// Outside reference: tests/sketch/data/{texts,pairs}.tsv, written by
// tests/sketch/reference/make_shingle_fixture.py with Python's stdlib (str is a
// sequence of code points; script membership from unicodedata character
// names). UTF-8 byte sequences are from RFC 3629 (section 3 table and
// section 7 examples).
#include "sketch/shingles.h"

#include <gtest/gtest.h>

#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "sketch/set_similarity.h"

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

TEST(Words, SplitsOnAsciiWhitespace) {
  const auto w = Words("  alpha beta\tgamma\n delta  ");
  ASSERT_EQ(w.size(), 4u);
  EXPECT_EQ(w[0], "alpha");
  EXPECT_EQ(w[3], "delta");
  EXPECT_EQ(CountWords("  alpha beta\tgamma\n delta  "), 4u);
  EXPECT_EQ(CountWords(""), 0u);
  EXPECT_EQ(CountWords("   "), 0u);
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
  // Word mode would see a single "word": one shingle for the whole text.
  opts.mode = ShingleMode::kWords;
  EXPECT_EQ(Shingles(text, opts).size(), 1u);
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

}  // namespace
}  // namespace prefsift::sketch
