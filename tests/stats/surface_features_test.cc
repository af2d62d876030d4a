// Tests of src/stats/surface_features. The expected values follow the
// definitions in docs/statistics.md (our own definitions; Markdown list,
// heading and code-block shapes follow CommonMark 0.30 in spirit, from memory).
#include "stats/surface_features.h"

#include <cctype>
#include <string>

#include <gtest/gtest.h>

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

}  // namespace
}  // namespace prefsift::stats
