#include "core/json_dump.h"

#include <gtest/gtest.h>

#include <bit>
#include <cmath>
#include <cstdint>
#include <limits>
#include <random>
#include <string>
#include <vector>

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

// The reference for every check here is nlohmann's own serializer
// (nlohmann-json3-dev 3.11.2, Debian 12): j.dump() with its defaults.
std::string Fast(const Json& j) {
  std::string out;
  AppendCompactJson(j, &out);
  return out;
}

// The outcome of a serialisation: its bytes, or the type_error it threw.
struct Outcome {
  bool threw = false;
  int id = 0;
  std::string text;  // bytes, or what()
};

template <typename F>
Outcome Capture(F f) {
  Outcome o;
  try {
    o.text = f();
  } catch (const Json::type_error& e) {
    o.threw = true;
    o.id = e.id;
    o.text = e.what();
  }
  return o;
}

void ExpectSameOutcome(const Outcome& ref, const Outcome& fast, const std::string& what) {
  ASSERT_EQ(ref.threw, fast.threw) << what << "\nreference: " << ref.text << "\nfast: " << fast.text;
  EXPECT_EQ(ref.id, fast.id) << what;
  EXPECT_EQ(ref.text, fast.text) << what;
}

void AppendUtf8(uint32_t cp, std::string* s) {
  if (cp < 0x80) {
    s->push_back(static_cast<char>(cp));
  } else if (cp < 0x800) {
    s->push_back(static_cast<char>(0xC0 | (cp >> 6)));
    s->push_back(static_cast<char>(0x80 | (cp & 0x3F)));
  } else if (cp < 0x10000) {
    s->push_back(static_cast<char>(0xE0 | (cp >> 12)));
    s->push_back(static_cast<char>(0x80 | ((cp >> 6) & 0x3F)));
    s->push_back(static_cast<char>(0x80 | (cp & 0x3F)));
  } else {
    s->push_back(static_cast<char>(0xF0 | (cp >> 18)));
    s->push_back(static_cast<char>(0x80 | ((cp >> 12) & 0x3F)));
    s->push_back(static_cast<char>(0x80 | ((cp >> 6) & 0x3F)));
    s->push_back(static_cast<char>(0x80 | (cp & 0x3F)));
  }
}

// Seeded generator of valid documents of every kind nlohmann parses to.
class Gen {
 public:
  explicit Gen(uint64_t seed) : rng_(seed) {}

  size_t Below(size_t n) { return static_cast<size_t>(rng_() % n); }

  // Valid UTF-8: ASCII 0x00-0x7F (escapes included), 2-, 3- and 4-byte code
  // points, U+2028 and U+FEFF; sometimes long, so whole 8-byte words are skipped.
  std::string Text() {
    size_t len = Below(4) == 0 ? Below(300) : Below(16);
    std::string s;
    for (size_t i = 0; i < len; ++i) {
      switch (Below(10)) {
        case 0: AppendUtf8(static_cast<uint32_t>(Below(0x20)), &s); break;
        case 1: s.push_back("\"\\/\x7f\t\n"[Below(6)]); break;
        case 2: AppendUtf8(static_cast<uint32_t>(0x80 + Below(0x800 - 0x80)), &s); break;
        case 3: {
          uint32_t cp;
          do {
            cp = static_cast<uint32_t>(0x800 + Below(0x10000 - 0x800));
          } while (cp >= 0xD800 && cp <= 0xDFFF);
          AppendUtf8(cp, &s);
          break;
        }
        case 4: AppendUtf8(static_cast<uint32_t>(0x10000 + Below(0x110000 - 0x10000)), &s); break;
        case 5: AppendUtf8(Below(2) ? 0x2028 : 0xFEFF, &s); break;
        default: AppendUtf8(static_cast<uint32_t>(Below(0x80)), &s); break;
      }
    }
    return s;
  }

  std::string Key() {
    static const char* const kLike[] = {"a", "a ", "A", " a", "id", "id\n", "\"id\"", "", "prompt", "prompt\u00e9"};
    if (Below(3) == 0) return Text();
    std::string k = kLike[Below(std::size(kLike))];
    if (Below(10) == 0) k.push_back('\0');
    return k;
  }

  double Float() {
    static const double kSpecial[] = {0.0, -0.0, 1.0, -1.0, 1e300, -1e300, 5e-324, 0.1, 1e16, 1e17, 123456789012345678.0,
                                      2.5e-8, std::numeric_limits<double>::max(), std::numeric_limits<double>::min(),
                                      std::numeric_limits<double>::quiet_NaN(), std::numeric_limits<double>::infinity(),
                                      -std::numeric_limits<double>::infinity(), 3.5, 1e21, 1e-7};
    switch (Below(3)) {
      case 0: return kSpecial[Below(std::size(kSpecial))];
      case 1: return std::bit_cast<double>(static_cast<uint64_t>(rng_()));
      default: return static_cast<double>(static_cast<int64_t>(rng_() % 2000001) - 1000000) / static_cast<double>(1 + Below(1000));
    }
  }

  Json Value(int depth) {
    const size_t kind = Below(depth >= 6 ? 6 : 9);
    switch (kind) {
      case 0: return nullptr;
      case 1: return Below(2) == 0;
      case 2: {
        static const int64_t kInts[] = {0, -1, 1, -2, 9, 10, -10, 99, 100, std::numeric_limits<int64_t>::min(),
                                        std::numeric_limits<int64_t>::max(), std::numeric_limits<int64_t>::min() + 1};
        if (Below(2)) return kInts[Below(std::size(kInts))];
        return static_cast<int64_t>(rng_()) >> Below(64);
      }
      case 3: {
        static const uint64_t kUns[] = {0, 1, 10, std::numeric_limits<uint64_t>::max(),
                                        static_cast<uint64_t>(std::numeric_limits<int64_t>::max()) + 1};
        if (Below(2)) return kUns[Below(std::size(kUns))];
        return static_cast<uint64_t>(rng_() >> Below(64));
      }
      case 4: return Float();
      case 5: return Text();
      case 6:
      case 7: {
        Json o = Json::object();
        size_t n = Below(3) == 0 ? 0 : Below(6);
        for (size_t i = 0; i < n; ++i) o[Key()] = Value(depth + 1);
        return o;
      }
      default: {
        Json a = Json::array();
        size_t n = Below(3) == 0 ? 0 : Below(6);
        for (size_t i = 0; i < n; ++i) a.push_back(Value(depth + 1));
        return a;
      }
    }
  }

 private:
  std::mt19937_64 rng_;
};

TEST(JsonDump, MatchesNlohmannDumpOnRandomDocuments) {
  Gen g(20240611);
  size_t bytes = 0;
  for (int i = 0; i < 5000; ++i) {
    Json doc = i % 2 ? g.Value(0) : Json::object({{"id", i}, {"body", g.Value(1)}});
    const std::string ref = doc.dump();  // reference: nlohmann 3.11.2
    const std::string fast = Fast(doc);
    ASSERT_EQ(ref, fast) << "document " << i;
    bytes += ref.size();
    // Appends: what was in the string stays.
    std::string prefixed = "x";
    AppendCompactJson(doc, &prefixed);
    ASSERT_EQ("x" + ref, prefixed);
  }
  EXPECT_GT(bytes, 100000u);
}

TEST(JsonDump, MatchesNlohmannDumpOnEveryLeafKind) {
  const std::vector<Json> leaves = {
      nullptr, true, false, 0, -0, std::numeric_limits<int64_t>::min(), std::numeric_limits<int64_t>::max(),
      std::numeric_limits<uint64_t>::max(), 0.0, -0.0, 1.0, 1e300, 5e-324, 0.1,
      std::numeric_limits<double>::quiet_NaN(), std::numeric_limits<double>::infinity(),
      -std::numeric_limits<double>::infinity(), "", Json::object(), Json::array(), Json::array({Json::object()}),
      Json::binary({1, 2, 255}), Json::binary({}, 7), Json::binary({0}), Json(Json::value_t::discarded)};
  for (const Json& v : leaves) {
    EXPECT_EQ(v.dump(), Fast(v));  // reference: nlohmann 3.11.2
    Json wrapped = Json::array({v, Json::object({{"k", v}})});
    EXPECT_EQ(wrapped.dump(), Fast(wrapped));
  }
  EXPECT_EQ(Fast(Json(std::numeric_limits<int64_t>::min())), "-9223372036854775808");
  EXPECT_EQ(Fast(Json(std::numeric_limits<uint64_t>::max())), "18446744073709551615");
  EXPECT_EQ(Fast(Json(1.0)), "1.0");
}

TEST(JsonDump, EveryAsciiByteEscapesAsNlohmannDoes) {
  for (int c = 0; c < 0x80; ++c) {
    const std::string s = std::string("ab") + static_cast<char>(c) + "cdefghijk" + static_cast<char>(c);
    Json j = Json::object({{s, s}});
    EXPECT_EQ(j.dump(), Fast(j)) << c;  // reference: nlohmann 3.11.2
    std::string out;
    AppendJsonString(s, &out);
    EXPECT_EQ(Json(s).dump(), out) << c;
  }
  EXPECT_EQ(Fast(Json("\x01\x1f\x7f")), "\"\\u0001\\u001f\x7f\"");
}

TEST(JsonDump, ParsedLinesRoundTrip) {
  const char* const lines[] = {
      R"({"a":"x\u0001y","b":[1,-2,3.5,true,null],"c":"é😀\t"})",
      R"({"id":"r1","prompt":"Say \"hi\"\n\\ back","chosen":"\u2028\ufeff","rejected":"","score":1e2,"n":-0})",
      R"([{},[],{"":""},[[[[[[]]]]]],18446744073709551615,-9223372036854775808,0.1,1E-7,2.0])",
      R"({"a":1,"a":2,"b":{"a":{"a":"\u001f\u0000"}}})",
      R"("\ud83d\ude00 \u00e9 \b\f\r")",
  };
  for (const char* line : lines) {
    Json j = Json::parse(line);
    EXPECT_EQ(j.dump(), Fast(j)) << line;  // reference: nlohmann 3.11.2
  }
  EXPECT_EQ(Fast(Json::parse(lines[0])), R"({"a":"x\u0001y","b":[1,-2,3.5,true,null],"c":"é😀\t"})");
}

TEST(JsonDump, InvalidUtf8ThrowsAsNlohmannDoes) {
  const std::string bad[] = {"\xff", "\xc0\xaf", "\xed\xa0\x80", "\xe2\x82", "ok\xe2\x82", "\xf4\x90\x80\x80",
                             "\xe0\x80\x80", "\xf0\x80\x80\x80", "\x80", "a\xc3", "\xc3\x28", "x\xf8\x88\x80\x80\x80"};
  for (const std::string& s : bad) {
    const std::vector<Json> docs = {Json(s), Json::object({{"v", s}}), Json::object({{s, 1}}),
                                    Json::array({1, Json::object({{"k", Json::array({"fine", s})}})})};
    for (const Json& d : docs) {
      const Outcome ref = Capture([&] { return d.dump(); });  // reference: nlohmann 3.11.2
      const Outcome fast = Capture([&] { return Fast(d); });
      EXPECT_TRUE(ref.threw);
      EXPECT_EQ(ref.id, 316);
      ExpectSameOutcome(ref, fast, s);
    }
    const Outcome ref = Capture([&] { return Json(s).dump(); });
    const Outcome fast = Capture([&] {
      std::string out;
      AppendJsonString(s, &out);
      return out;
    });
    ExpectSameOutcome(ref, fast, s);
  }
}

// The validity test agrees with nlohmann's decoder byte sequence by byte
// sequence: every 1- and 2-byte string, and 3- and 4-byte strings built from
// bytes at the edges of the UTF-8 ranges.
TEST(JsonDump, Utf8ValidityAgreesWithNlohmannDecoder) {
  auto check = [](const std::string& s) {
    const Outcome ref = Capture([&] { return Json(s).dump(); });  // reference: nlohmann 3.11.2
    const Outcome fast = Capture([&] { return Fast(Json(s)); });
    ExpectSameOutcome(ref, fast, s);
  };
  for (int a = 0; a < 256; ++a) {
    check(std::string(1, static_cast<char>(a)));
    for (int b = 0; b < 256; ++b) check(std::string{static_cast<char>(a), static_cast<char>(b)});
  }
  const int edges[] = {0x00, 0x22, 0x41, 0x7F, 0x80, 0x8F, 0x90, 0x9F, 0xA0, 0xBF, 0xC0, 0xC2, 0xDF, 0xE0, 0xF4, 0xFF};
  for (int lead = 0xC0; lead < 0x100; ++lead) {
    for (int b : edges) {
      for (int c : edges) {
        const std::string three{static_cast<char>(lead), static_cast<char>(b), static_cast<char>(c)};
        check(three);
        check("xy" + three + "z");
        for (int d : {0x41, 0x80, 0xBF}) check(three + static_cast<char>(d));
      }
    }
  }
}

TEST(JsonDump, RandomBytesMatchNlohmannBytesOrError) {
  std::mt19937_64 rng(7);
  for (int i = 0; i < 20000; ++i) {
    std::string s(rng() % 40, '\0');
    for (char& c : s) c = static_cast<char>(rng() % 4 ? rng() % 0x80 : 0x80 + rng() % 0x80);
    const Outcome ref = Capture([&] { return Json::array({s}).dump(); });  // reference: nlohmann 3.11.2
    const Outcome fast = Capture([&] { return Fast(Json::array({s})); });
    ExpectSameOutcome(ref, fast, s);
  }
}

}  // namespace
}  // namespace prefsift
