#include "core/json_pointer.h"

#include <gtest/gtest.h>

namespace prefsift {
namespace {

// RFC 6901 section 5's example pointers and their reference tokens.
TEST(JsonPointer, Rfc6901Section5Examples) {
  struct Case { const char* text; std::vector<std::string> tokens; };
  std::vector<Case> cases = {
      {"", {}}, {"/foo", {"foo"}}, {"/foo/0", {"foo", "0"}}, {"/", {""}}, {"/a~1b", {"a/b"}},
      {"/c%d", {"c%d"}}, {"/e^f", {"e^f"}}, {"/g|h", {"g|h"}}, {"/i\\j", {"i\\j"}}, {"/k\"l", {"k\"l"}},
      {"/ ", {" "}}, {"/m~0n", {"m~n"}}};
  for (const auto& c : cases) {
    auto p = ParseJsonPointer(c.text, "test");
    ASSERT_TRUE(p.ok()) << c.text;
    EXPECT_EQ(p.value().tokens, c.tokens) << c.text;
  }
  // "~01" is "~1" unescaped once, not "/" (RFC 6901 section 4 ordering).
  EXPECT_EQ(ParseJsonPointer("/~01", "t").value().tokens, std::vector<std::string>{"~1"});
}

TEST(JsonPointer, Invalid) {
  EXPECT_FALSE(ParseJsonPointer("foo", "t").ok());
  EXPECT_FALSE(ParseJsonPointer("/a~2", "t").ok());
  EXPECT_FALSE(ParseJsonPointer("/a~", "t").ok());
  auto bad = ParseJsonPointer("prompt", "inputs[0].layout.prompt");
  EXPECT_NE(bad.status().message().find("inputs[0].layout.prompt"), std::string::npos);
}

TEST(JsonPointer, ArrayIndexTokens) {
  size_t i = 0;
  EXPECT_TRUE(ArrayIndexToken("0", &i));
  EXPECT_EQ(i, 0u);
  EXPECT_TRUE(ArrayIndexToken("12", &i));
  EXPECT_EQ(i, 12u);
  EXPECT_FALSE(ArrayIndexToken("01", &i));  // leading zero not allowed (RFC 6901 section 4)
  EXPECT_FALSE(ArrayIndexToken("-", &i));
  EXPECT_FALSE(ArrayIndexToken("1a", &i));
}

}  // namespace
}  // namespace prefsift
