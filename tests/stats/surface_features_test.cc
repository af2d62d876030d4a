// Tests of src/stats/surface_features. The expected values follow the
// definitions in docs/statistics.md (our own definitions; Markdown list,
// heading and code-block shapes follow CommonMark 0.30 in spirit, from memory).
#include "stats/surface_features.h"

#include <cctype>
#include <random>
#include <string>

#include <gtest/gtest.h>

#include "adversarial_text.h"

namespace prefsift::stats {
namespace {

TEST(SurfaceFeatures, WordsAndCodePoints) {
  const SurfaceFeatures f = ComputeSurfaceFeatures("  Hello,\tworld!\n\nnaïve café 日本 ");
  EXPECT_EQ(f.words, 5u);
  // 31 code points: Python's len() of the same string (str counts code points).
  EXPECT_EQ(f.code_points, 31u);
  EXPECT_EQ(ComputeSurfaceFeatures("").words, 0u);
  EXPECT_EQ(ComputeSurfaceFeatures("\xF0\x9F\x98\x80").code_points, 1u);  // U+1F600, 4 bytes
}

TEST(SurfaceFeatures, ListItems) {
  const std::string text =
      "Steps:\n- one\n* two\n+ three\n1. four\n2) five\n  - nested\n10. ten\n"
      "-not a list\n---\n1.5 is a number\n";
  EXPECT_EQ(ComputeSurfaceFeatures(text).list_items, 7u);
}

TEST(SurfaceFeatures, Headings) {
  EXPECT_TRUE(ComputeSurfaceFeatures("intro\n## Section\ntext").has_heading);
  EXPECT_TRUE(ComputeSurfaceFeatures("#").has_heading);
  EXPECT_FALSE(ComputeSurfaceFeatures("#hashtag\n####### seven").has_heading);
  EXPECT_FALSE(ComputeSurfaceFeatures("see issue # 4").has_heading);
}

TEST(SurfaceFeatures, CodeBlocks) {
  EXPECT_TRUE(ComputeSurfaceFeatures("Run:\n```sh\nls\n```\n").has_code_block);
  EXPECT_TRUE(ComputeSurfaceFeatures("Run:\n~~~\nls\n~~~\n").has_code_block);
  EXPECT_TRUE(ComputeSurfaceFeatures("Run:\n\n    make all\n").has_code_block);
  EXPECT_TRUE(ComputeSurfaceFeatures("\tindented first line").has_code_block);
  // Indented continuation of a list item is not a code block.
  EXPECT_FALSE(ComputeSurfaceFeatures("- item\n\n    more about the item\n").has_code_block);
  // Indented without a blank line before: a paragraph continuation.
  EXPECT_FALSE(ComputeSurfaceFeatures("text\n    still text\n").has_code_block);
  EXPECT_FALSE(ComputeSurfaceFeatures("inline `code` only").has_code_block);
}

TEST(SurfaceFeatures, Refusals) {
  EXPECT_TRUE(ComputeSurfaceFeatures("I'm sorry, but I can't help with that.").has_refusal);
  EXPECT_TRUE(ComputeSurfaceFeatures("AS AN AI language model...").has_refusal);
  EXPECT_TRUE(ComputeSurfaceFeatures("I\xE2\x80\x99m sorry.").has_refusal);  // curly apostrophe
  EXPECT_TRUE(ComputeSurfaceFeatures("I apologize for the confusion.").has_refusal);
  EXPECT_FALSE(ComputeSurfaceFeatures("Sure! Here is the answer.").has_refusal);
  EXPECT_FALSE(RefusalPhrases().empty());
}

// Every listed phrase is found wherever it stands, in upper case, and with
// U+2019 for "'" (the one-pass scan checks a phrase's second byte first, so a
// phrase added to the list with another second byte would fail here).
TEST(SurfaceFeatures, EveryRefusalPhraseIsFound) {
  for (const char* phrase : RefusalPhrases()) {
    std::string p(phrase);
    EXPECT_TRUE(ComputeSurfaceFeatures("Well. " + p + " now").has_refusal) << p;
    std::string upper = p;
    for (char& c : upper) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
    EXPECT_TRUE(ComputeSurfaceFeatures(upper).has_refusal) << upper;
    std::string curly;
    for (char c : p) curly += c == '\'' ? std::string("\xE2\x80\x99") : std::string(1, c);
    EXPECT_TRUE(ComputeSurfaceFeatures("x" + curly).has_refusal) << p;
    EXPECT_FALSE(ComputeSurfaceFeatures(p.substr(0, p.size() - 1)).has_refusal) << p;
  }
}

TEST(SurfaceFeatures, Urls) {
  EXPECT_TRUE(ComputeSurfaceFeatures("see https://example.com/x").has_url);
  EXPECT_TRUE(ComputeSurfaceFeatures("see HTTP://example.org").has_url);
  EXPECT_TRUE(ComputeSurfaceFeatures("(www.example.net)").has_url);
  EXPECT_FALSE(ComputeSurfaceFeatures("awww.example").has_url);
  EXPECT_FALSE(ComputeSurfaceFeatures("no links here; http is a protocol").has_url);
}

// Differential tests: the one-pass block scan (ComputeSurfaceFeatures) gives
// exactly the plain byte loops' features (ComputeSurfaceFeaturesReference,
// the code before the block scan) on random and adversarial texts. The
// reference is this project's own; the expected values of the tests above
// come from the documented definitions.
void ExpectSameFeatures(std::string_view text) {
  const SurfaceFeatures fast = ComputeSurfaceFeatures(text);
  const SurfaceFeatures ref = ComputeSurfaceFeaturesReference(text);
  ASSERT_EQ(fast.words, ref.words) << ::testing::PrintToString(std::string(text));
  ASSERT_EQ(fast.code_points, ref.code_points) << ::testing::PrintToString(std::string(text));
  ASSERT_EQ(fast.list_items, ref.list_items) << ::testing::PrintToString(std::string(text));
  ASSERT_EQ(fast.has_code_block, ref.has_code_block) << ::testing::PrintToString(std::string(text));
  ASSERT_EQ(fast.has_heading, ref.has_heading) << ::testing::PrintToString(std::string(text));
  ASSERT_EQ(fast.has_refusal, ref.has_refusal) << ::testing::PrintToString(std::string(text));
  ASSERT_EQ(fast.has_url, ref.has_url) << ::testing::PrintToString(std::string(text));
}

TEST(SurfaceFeaturesDifferential, RandomAdversarialTexts) {
  for (uint64_t seed = 1; seed <= 6; ++seed) {
    std::mt19937_64 rng(seed);
    for (size_t n : prefsift::testing::AdversarialLengths()) {
      // A view of the first n bytes of a longer text: the bytes after the
      // view's end are real text, so a scan that read past it would differ.
      const std::string s = prefsift::testing::AdversarialText(rng, n + 24);
      ExpectSameFeatures(std::string_view(s).substr(0, n));
    }
  }
}

TEST(SurfaceFeaturesDifferential, EveryPrefixEndsMidPattern) {
  std::mt19937_64 rng(11);
  for (int t = 0; t < 20; ++t) {
    const std::string s = prefsift::testing::AdversarialText(rng, 300);
    for (size_t k = 0; k <= s.size(); ++k) ExpectSameFeatures(std::string_view(s).substr(0, k));
  }
  for (const char* piece : {"I'm sorry", "i\xE2\x80\x99m sorry", "https://a", "www.b", "\xE3\x80\x80x"}) {
    const std::string s = std::string(61, 'x') + " " + piece;
    for (size_t k = 0; k <= s.size(); ++k) ExpectSameFeatures(std::string_view(s).substr(0, k));
  }
}

TEST(SurfaceFeaturesDifferential, PhrasesAtEveryPlaceOfABlock) {
  for (const char* phrase : RefusalPhrases()) {
    for (size_t at = 0; at < 140; ++at) {
      const std::string s = std::string(at, 'x') + " " + phrase + " " + std::string(at % 7, 'y');
      ExpectSameFeatures(s);
      ASSERT_TRUE(ComputeSurfaceFeatures(s).has_refusal) << phrase << " at " << at;
    }
  }
  for (const char* url : {"http://h", "HTTPS://h", "www.h"}) {
    for (size_t at = 0; at < 140; ++at) {
      const std::string s = std::string(at, 'x') + " " + url;
      ExpectSameFeatures(s);
      ASSERT_TRUE(ComputeSurfaceFeatures(s).has_url) << url << " at " << at;
    }
  }
}

TEST(SurfaceFeaturesDifferential, AllByteValuesAndLongLines) {
  std::string all;
  for (int rep = 0; rep < 3; ++rep)
    for (int c = 0; c < 256; ++c) all.push_back(static_cast<char>(c));
  for (size_t k = 0; k <= all.size(); ++k) ExpectSameFeatures(std::string_view(all).substr(k));
  std::mt19937_64 rng(12);
  std::string one_line = prefsift::testing::AdversarialText(rng, 50000);
  for (char& c : one_line) {
    if (c == '\n') c = ' ';
  }
  ExpectSameFeatures(one_line);
  ExpectSameFeatures(std::string(5000, ' ') + "word");
  ExpectSameFeatures(std::string(5000, '\n') + "    code");
  ExpectSameFeatures(std::string(5000, '\xE3'));
}

}  // namespace
}  // namespace prefsift::stats
