#include "core/json_parse.h"

#include <gtest/gtest.h>

#include <cstdint>
#include <cstring>
#include <random>
#include <string>
#include <vector>

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

// The reference for every check here is nlohmann's own parser
// (nlohmann-json3-dev 3.11.2, Debian 12): Json::parse(text) without
// exceptions; ParseJsonFast must build the same tree or decline.
Json Reference(std::string_view text) { return Json::parse(text, nullptr, /*allow_exceptions=*/false); }

// Same tree, down to each number's stored type (unsigned / integer / float),
// a float's bits (-0.0 vs 0.0) and object member order.
::testing::AssertionResult SameTree(const Json& a, const Json& b, const std::string& at = "") {
  if (a.type() != b.type()) {
    return ::testing::AssertionFailure() << "at '" << at << "': type " << a.type_name() << "/"
                                         << static_cast<int>(a.type()) << " vs " << b.type_name() << "/"
                                         << static_cast<int>(b.type());
  }
  switch (a.type()) {
    case Json::value_t::object: {
      if (a.size() != b.size()) return ::testing::AssertionFailure() << "at '" << at << "': object sizes differ";
      auto ia = a.items().begin();
      auto ib = b.items().begin();
      for (; ia != a.items().end(); ++ia, ++ib) {
        if (ia.key() != ib.key()) return ::testing::AssertionFailure() << "at '" << at << "': key order differs";
        auto r = SameTree(ia.value(), ib.value(), at + "/" + ia.key());
        if (!r) return r;
      }
      return ::testing::AssertionSuccess();
    }
    case Json::value_t::array: {
      if (a.size() != b.size()) return ::testing::AssertionFailure() << "at '" << at << "': array sizes differ";
      for (size_t i = 0; i < a.size(); ++i) {
        auto r = SameTree(a[i], b[i], at + "/" + std::to_string(i));
        if (!r) return r;
      }
      return ::testing::AssertionSuccess();
    }
    case Json::value_t::number_float: {
      const double x = a.get<double>();
      const double y = b.get<double>();
      if (std::memcmp(&x, &y, sizeof x) != 0) {
        return ::testing::AssertionFailure() << "at '" << at << "': float bits differ " << x << " vs " << y;
      }
      return ::testing::AssertionSuccess();
    }
    default:
      if (a != b) return ::testing::AssertionFailure() << "at '" << at << "': " << a.dump() << " vs " << b.dump();
      return ::testing::AssertionSuccess();
  }
}

// When the fast parser accepts `text`, nlohmann 3.11.2 must accept it too and
// give the same tree and the same dump() bytes. Returns whether it accepted.
bool CheckAgainstNlohmann(const std::string& text) {
  Json fast;
  const bool ok = ParseJsonFast(text, &fast);
  if (!ok) return false;
  const Json ref = Reference(text);
  EXPECT_FALSE(ref.is_discarded()) << "fast accepted what nlohmann rejects: " << text;
  if (ref.is_discarded()) return true;
  EXPECT_TRUE(SameTree(fast, ref)) << text;
  EXPECT_EQ(fast, ref) << text;
  EXPECT_EQ(fast.dump(), ref.dump()) << text;
  return true;
}

// Seeded random JSON texts, written by hand (not by a serializer) so that
// whitespace, escapes, number spellings and duplicate keys vary.
class Gen {
 public:
  explicit Gen(uint32_t seed) : rng_(seed) {}

  std::string Text() {
    std::string s;
    Ws(&s);
    Value(&s, 0);
    Ws(&s);
    return s;
  }

  // `t` with one random byte deleted, replaced, inserted or the text cut.
  std::string Mutate(std::string t) {
    static const char kBytes[] = "{}[],:\"\\ 0-.eEtfn1\xff\xc3\xa9\x01";
    const size_t pos = t.empty() ? 0 : Pick(t.size());
    switch (Pick(4)) {
      case 0:
        if (!t.empty()) t.erase(pos, 1);
        break;
      case 1:
        if (!t.empty()) t[pos] = kBytes[Pick(sizeof kBytes - 1)];
        break;
      case 2:
        t.insert(t.begin() + static_cast<long>(pos), kBytes[Pick(sizeof kBytes - 1)]);
        break;
      default:
        t.resize(pos);
        break;
    }
    return t;
  }

 private:
  size_t Pick(size_t n) { return std::uniform_int_distribution<size_t>(0, n - 1)(rng_); }

  void Ws(std::string* s) {
    static const char* kWs[] = {"", "", "", " ", "\t", "\n", "\r\n", "  ", " \t\r\n"};
    s->append(kWs[Pick(std::size(kWs))]);
  }

  void Value(std::string* s, int depth) {
    const size_t kind = depth >= 5 ? 2 + Pick(4) : Pick(7);
    switch (kind) {
      case 0:
      case 6:
        Object(s, depth);
        break;
      case 1:
        Array(s, depth);
        break;
      case 2:
        String(s);
        break;
      case 3:
      case 4:
        Number(s);
        break;
      default: {
        static const char* kLit[] = {"true", "false", "null"};
        s->append(kLit[Pick(3)]);
      }
    }
  }

  void Object(std::string* s, int depth) {
    s->push_back('{');
    const size_t n = Pick(6);
    for (size_t i = 0; i < n; ++i) {
      if (i) s->push_back(',');
      Ws(s);
      if (Pick(3) == 0) {
        // Small key pool: duplicate keys are frequent.
        static const char* kKeys[] = {"\"id\"", "\"a\"", "\"\\u0061\"", "\"b\"", "\"\"", "\"\\u00e9\"", "\"\xc3\xa9\""};
        s->append(kKeys[Pick(std::size(kKeys))]);
      } else {
        String(s);
      }
      Ws(s);
      s->push_back(':');
      Ws(s);
      Value(s, depth + 1);
      Ws(s);
    }
    if (n == 0) Ws(s);
    s->push_back('}');
  }

  void Array(std::string* s, int depth) {
    s->push_back('[');
    const size_t n = Pick(6);
    for (size_t i = 0; i < n; ++i) {
      if (i) s->push_back(',');
      Ws(s);
      Value(s, depth + 1);
      Ws(s);
    }
    if (n == 0) Ws(s);
    s->push_back(']');
  }

  void String(std::string* s) {
    static const char* kPieces[] = {
        "a", "hello", "r1", "x y", "0", "-0", "2024-01-05", ": -0", "\\\"", "\\\\", "\\/", "\\b", "\\f", "\\n",
        "\\r", "\\t", "\\u0000", "\\u001f", "\\u00e9", "\\u00E9", "\\u20ac", "\\uD83D\\uDE00", "\\ud83d\\ude00",
        "\\uffff", "\\u007f", "\xc3\xa9", "\xe2\x82\xac", "\xf0\x9f\x98\x80", "\x7f", "'", "{}", "[1,2]",
        "a very long string piece that crosses sixty-four bytes of simdjson's block boundary ........"};
    s->push_back('"');
    const size_t n = Pick(5);
    for (size_t i = 0; i < n; ++i) s->append(kPieces[Pick(std::size(kPieces))]);
    s->push_back('"');
  }

  void Number(std::string* s) {
    static const char* kTokens[] = {
        "0", "-0", "1", "-1", "42", "9223372036854775807", "9223372036854775808", "-9223372036854775808",
        "-9223372036854775809", "18446744073709551615", "18446744073709551616", "99999999999999999999",
        "-0.0", "0.0", "-0e0", "0e-5", "1e308", "1.7976931348623157e308", "1e400", "-1e400", "1e-400",
        "-1e-400", "5e-324", "4.9e-324", "2.4703282292062328e-324", "2.2250738585072011e-308", "1E2", "1e+2",
        "1.5", "-2.5e-3", "0.1", "3.141592653589793", "123456789012345678", "1.0", "100e-2"};
    switch (Pick(4)) {
      case 0:
        s->append(kTokens[Pick(std::size(kTokens))]);
        break;
      case 1:
        s->append(std::to_string(static_cast<int64_t>(rng_())) );
        break;
      case 2: {
        // A random decimal: up to 20 digits, optional fraction and exponent.
        if (Pick(2)) s->push_back('-');
        const size_t digits = 1 + Pick(20);
        s->push_back(static_cast<char>('1' + Pick(9)));
        for (size_t i = 1; i < digits; ++i) s->push_back(static_cast<char>('0' + Pick(10)));
        if (Pick(2)) {
          s->push_back('.');
          for (size_t i = 0, m = 1 + Pick(18); i < m; ++i) s->push_back(static_cast<char>('0' + Pick(10)));
        }
        if (Pick(2)) {
          s->push_back("eE"[Pick(2)]);
          if (Pick(2)) s->push_back("+-"[Pick(2)]);
          s->append(std::to_string(Pick(330)));
        }
        break;
      }
      default:
        s->append(std::to_string(rng_() % 1000));
        break;
    }
  }

  std::mt19937 rng_;
};

TEST(JsonParseFast, RandomTextsMatchNlohmann) {
  Gen gen(20261203);
  int accepted = 0;
  const int kTexts = 20000;
  for (int i = 0; i < kTexts; ++i) {
    const std::string t = gen.Text();
    if (CheckAgainstNlohmann(t)) ++accepted;
    if (::testing::Test::HasFailure()) FAIL() << "stopping after the first mismatch";
  }
  // Declines are rare (big integers, "-0", overflow): the fast path is taken.
  EXPECT_GT(accepted, kTexts / 2);
}

TEST(JsonParseFast, MutatedTextsNeverDisagree) {
  // Mostly invalid texts: whenever the fast parser accepts, nlohmann
  // (3.11.2) must accept the same tree.
  Gen gen(7);
  for (int i = 0; i < 20000; ++i) {
    std::string t = gen.Text();
    for (int k = 0, m = 1 + i % 3; k < m; ++k) t = gen.Mutate(std::move(t));
    CheckAgainstNlohmann(t);
    if (::testing::Test::HasFailure()) FAIL() << "stopping after the first mismatch";
  }
}

TEST(JsonParseFast, OrdinaryRecordsTakeTheFastPath) {
  const char* kRecords[] = {
      R"({"id":"r1","prompt":"hi","candidates":["a","b"],"choice":0})",
      R"({"id":"r2","prompt":"Was ist das?","candidates":["caf\u00e9","\u20ac 5"],"choice":1,"meta":{"date":"2024-01-05","score":-0.5,"n":-3}})",
      R"({ "id" : "r3", "prompt" : "line\nbreak \"q\"", "candidates" : [ "x", "y" ], "choice" : 1, "w" : 1e-3 })",
      R"({"id":"r4","prompt":"emoji 😀 \ud83d\ude00","candidates":[],"choice":null,"ok":true,"bad":false})",
      R"([18446744073709551615,-9223372036854775808,9223372036854775807,0,1.5e300])",
  };
  for (const char* r : kRecords) {
    EXPECT_TRUE(CheckAgainstNlohmann(r)) << r;
  }
}

TEST(JsonParseFast, NumberTypesAsNlohmann) {
  struct Case {
    const char* text;
    Json::value_t type;
  };
  const Case kCases[] = {
      {"0", Json::value_t::number_unsigned},
      {"9223372036854775807", Json::value_t::number_unsigned},
      {"9223372036854775808", Json::value_t::number_unsigned},
      {"18446744073709551615", Json::value_t::number_unsigned},
      {"-1", Json::value_t::number_integer},
      {"-9223372036854775808", Json::value_t::number_integer},
      {"-0.0", Json::value_t::number_float},
      {"1e-400", Json::value_t::number_float},
      {"5e-324", Json::value_t::number_float},
      {"1.0", Json::value_t::number_float},
      {"1E2", Json::value_t::number_float},
  };
  for (const auto& c : kCases) {
    Json j;
    ASSERT_TRUE(ParseJsonFast(c.text, &j)) << c.text;
    EXPECT_EQ(j.type(), c.type) << c.text;
    EXPECT_TRUE(SameTree(j, Reference(c.text))) << c.text;
  }
  // Where the two libraries' number models differ, it declines and leaves
  // the text to nlohmann: "-0" (simdjson: same as "0"; nlohmann: integer 0),
  // integers beyond 64 bits (nlohmann: a float), overflow (both reject).
  for (const char* t : {"-0", "[-0]", "{\"a\": -0}", "18446744073709551616", "-9223372036854775809",
                        "123456789012345678901234", "1e400", "-1e400"}) {
    Json j;
    EXPECT_FALSE(ParseJsonFast(t, &j)) << t;
  }
  // "-0" in a string after a date-like '-' does not block a zero integer.
  Json j;
  EXPECT_TRUE(ParseJsonFast(R"({"d":"2024-01-05","n":0})", &j));
  EXPECT_TRUE(j["n"].is_number_unsigned());
}

TEST(JsonParseFast, DuplicateKeysFirstPlaceLastValue) {
  const std::string t = R"({"a":1,"b":2,"a":{"x":[3]},"c":4,"b":"z"})";
  Json j;
  ASSERT_TRUE(ParseJsonFast(t, &j));
  EXPECT_EQ(j.dump(), R"({"a":{"x":[3]},"b":"z","c":4})");
  EXPECT_TRUE(SameTree(j, Reference(t)));
  EXPECT_EQ(j.dump(), Reference(t).dump());
}

TEST(JsonParseFast, StringsAsNlohmann) {
  for (const std::string t : {R"("\u0000")", R"("a\u0000b")", R"("\u00e9\u00E9")", R"("\ud83d\ude00")",
                              "\"\xc3\xa9\xe2\x82\xac\xf0\x9f\x98\x80\"", R"("\"\\\/\b\f\n\r\t")", R"("\uffff")"}) {
    Json j;
    ASSERT_TRUE(ParseJsonFast(t, &j)) << t;
    EXPECT_TRUE(SameTree(j, Reference(t))) << t;
    EXPECT_EQ(j.dump(), Reference(t).dump()) << t;
  }
  Json j;
  ASSERT_TRUE(ParseJsonFast(R"("a\u0000b")", &j));
  EXPECT_EQ(j.get_ref<const std::string&>().size(), 3u);
}

TEST(JsonParseFast, InvalidTextsDecline) {
  const std::string kInvalid[] = {
      "",
      "   ",
      R"({"id":"r1","prompt")",
      R"({"id":"r1")",
      "[1,2",
      R"("\ud800")",
      R"("\udc00")",
      R"("\ud800\u0041")",
      R"("\ud800x")",
      "\"\xff\"",
      "\"\xc3\"",
      "\"\xed\xa0\x80\"",  // UTF-8 encoded surrogate
      "\"\xc0\xaf\"",      // overlong
      "\"a\x01\"",         // unescaped control character
      "{} x",
      "{}}",
      "[1,]",
      "{\"a\":1,}",
      "01",
      "1.",
      ".5",
      "+1",
      "tru",
      "nul",
      R"("\x")",
      "'a'",
      std::string("{}\0", 3),     // nlohmann stops at NUL and accepts: left to it
      "\xef\xbb\xbf{}",           // nlohmann skips a BOM and accepts: left to it
  };
  for (const auto& t : kInvalid) {
    Json j;
    EXPECT_FALSE(ParseJsonFast(t, &j)) << t;
  }
}

TEST(JsonParseFast, DepthBeyondSimdjsonsLimitDeclines) {
  const std::string shallow = std::string(500, '[') + "1" + std::string(500, ']');
  EXPECT_TRUE(CheckAgainstNlohmann(shallow));
  const std::string deep = std::string(1100, '[') + "1" + std::string(1100, ']');
  Json j;
  EXPECT_FALSE(ParseJsonFast(deep, &j));
  EXPECT_FALSE(Reference(deep).is_discarded());  // nlohmann has no depth limit
}

TEST(JsonParseFast, ReusesThePerThreadParserAcrossSizes) {
  std::string big = "[";
  for (int i = 0; i < 20000; ++i) big += (i ? ",\"" : "\"") + std::to_string(i) + "\"";
  big += "]";
  EXPECT_TRUE(CheckAgainstNlohmann(big));
  EXPECT_TRUE(CheckAgainstNlohmann("[1]"));
  EXPECT_TRUE(CheckAgainstNlohmann(big));
}

}  // namespace
}  // namespace prefsift
