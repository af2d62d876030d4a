#include "core/record_reader.h"

#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

Layout L(const Json& spec) {
  auto l = LayoutFromJson(spec, "t");
  EXPECT_TRUE(l.ok()) << l.status().message();
  return l.value();
}

std::string Reason(const Layout& layout, const std::string& line, InputLimits lim = {}) {
  RecordReader r(layout, lim);
  Record rec;
  RejectReason why;
  if (r.Read(line, "f:1", &rec, &why)) return "ok";
  return why.code;
}

TEST(RecordReader, ChoiceLayout) {
  RecordReader r(L(Json{{"preset", "choice"}}), {});
  Record rec;
  RejectReason why;
  ASSERT_TRUE(r.Read(R"({"id":7,"prompt":"Q","candidates":["a","b","c"],"choice":2,"x":{"y":1}})", "f:1", &rec, &why))
      << why.message;
  EXPECT_EQ(rec.id, "7");
  EXPECT_EQ(rec.candidates.size(), 3u);
  EXPECT_EQ(rec.chosen, 2);
  EXPECT_EQ(rec.ranks, (std::vector<int>{2, 2, 1}));
}

TEST(RecordReader, ChatTurnsCandidateObjectsAndRanks) {
  Layout l = L(Json{{"id", "/key"}, {"prompt", "/turns"}, {"candidates", "/answers"}, {"candidate_text", "/body"},
                    {"candidate_origin", "/by"}, {"ranks", "/ranks"}, {"annotator", "/who"}});
  RecordReader r(l, {});
  Record rec;
  RejectReason why;
  ASSERT_TRUE(r.Read(R"({"key":"k1","turns":[{"role":"system","content":"S"},{"role":"user","content":"U1"},)"
                     R"({"role":"assistant","content":"A"},{"role":"user","content":"U2"}],)"
                     R"("answers":[{"body":"x","by":"model"},{"body":"y","by":"human"},{"body":"z"}],)"
                     R"("ranks":[2,1,2],"who":42})",
                     "f:1", &rec, &why))
      << why.message;
  EXPECT_TRUE(rec.prompt_is_chat);
  EXPECT_EQ(rec.turns.size(), 4u);
  EXPECT_EQ(rec.UserPromptText(), "U1\nU2");
  EXPECT_EQ(rec.chosen, 1);
  EXPECT_EQ(rec.candidate_origin, (std::vector<std::string>{"model", "human", ""}));
  EXPECT_EQ(*rec.annotator, "42");
}

TEST(RecordReader, RanksDenseCompetitionAndOrder) {
  Layout ranks = L(Json{{"preset", "ranked"}});
  auto line = [](const char* r) {
    return std::string(R"({"id":"a","prompt":"p","candidates":["a","b","c"],"ranks":)") + r + "}";
  };
  EXPECT_EQ(Reason(ranks, line("[1,2,3]")), "ok");
  EXPECT_EQ(Reason(ranks, line("[1,1,2]")), "ok");   // dense ranking with a tie
  EXPECT_EQ(Reason(ranks, line("[1,1,3]")), "ok");   // standard competition ranking
  EXPECT_EQ(Reason(ranks, line("[1,3,4]")), "bad_ranking");  // a gap with no tie
  EXPECT_EQ(Reason(ranks, line("[0,1,2]")), "bad_ranking");
  EXPECT_EQ(Reason(ranks, line("[1,2]")), "bad_ranking");
  EXPECT_EQ(Reason(ranks, line("[1,\"2\",3]")), "bad_ranking");
  Layout order = L(Json{{"preset", "ordered"}});
  EXPECT_EQ(Reason(order, R"({"id":"a","prompt":"p","candidates":["a","b","c"],"order":[2,0,1]})"), "ok");
  EXPECT_EQ(Reason(order, R"({"id":"a","prompt":"p","candidates":["a","b","c"],"order":[2,2,1]})"), "bad_ranking");
}

TEST(RecordReader, RejectReasons) {
  Layout c = L(Json{{"preset", "choice"}});
  EXPECT_EQ(Reason(c, R"({"id":"a","prompt":"p","candidates":["a","b"],"choice":0)"), "not_json");  // truncated
  EXPECT_EQ(Reason(c, "[1,2]"), "not_an_object");
  EXPECT_EQ(Reason(c, "{\"id\":\"a\",\"prompt\":\"\xC0\xAF\",\"candidates\":[\"a\",\"b\"],\"choice\":0}"), "invalid_utf8");
  EXPECT_EQ(Reason(c, R"({"id":"a","candidates":["a","b"],"choice":0})"), "missing_field");
  EXPECT_EQ(Reason(c, R"({"id":"a","prompt":5,"candidates":["a","b"],"choice":0})"), "wrong_type");
  EXPECT_EQ(Reason(c, R"({"id":"a","prompt":"p","candidates":"ab","choice":0})"), "wrong_type");
  EXPECT_EQ(Reason(c, R"({"id":"a","prompt":"p","candidates":["a"],"choice":0})"), "too_few_candidates");
  EXPECT_EQ(Reason(c, R"({"id":"a","prompt":"p","candidates":["a","b"],"choice":2})"), "choice_out_of_range");
  EXPECT_EQ(Reason(c, R"({"id":"a","prompt":"p","candidates":["a","b"],"choice":-1})"), "choice_out_of_range");
  EXPECT_EQ(Reason(c, R"({"id":"a","prompt":"p","candidates":["a","b"],"choice":"1"})"), "wrong_type");
  EXPECT_EQ(Reason(c, R"({"id":"a","prompt":"p","candidates":["a","  "],"choice":0})"), "empty_candidate");
  EXPECT_EQ(Reason(c, R"({"id":"a","prompt":"  ","candidates":["a","b"],"choice":0})"), "empty_prompt");
  EXPECT_EQ(Reason(c, R"({"id":"a","prompt":"p","prompt":"q","candidates":["a","b"],"choice":0})"), "duplicate_key");
  std::string deep = R"({"id":"a","prompt":"p","candidates":["a","b"],"choice":0,"x":)" + std::string(500, '[') +
                     std::string(500, ']') + "}";
  EXPECT_EQ(Reason(c, deep), "json_too_deep");
  InputLimits lim;
  lim.max_candidates = 3;
  EXPECT_EQ(Reason(c, R"({"id":"a","prompt":"p","candidates":["a","b","c","d"],"choice":0})", lim),
            "too_many_candidates");
  lim.max_text_bytes = 4;
  EXPECT_EQ(Reason(c, R"({"id":"a","prompt":"hello","candidates":["a","b"],"choice":0})", lim), "text_too_long");
}

// A line is kept only if the whole line is valid JSON, also in values no
// field of the layout reads: kept lines are copied to the splits byte for
// byte (pipeline/apply_pass.cc), so a line with a malformed value anywhere
// would put invalid JSON in a split. This is why the reader validates every
// value (a full parse), not only the values it reads (docs/architecture.md,
// "Why every line is parsed whole"). Each malformed value below breaks the
// grammar of RFC 8259 (section in the comment). Python 3.11's json.loads
// refuses each too (checked when this test was written), but for 1e400,
// which it reads as infinity; RFC 8259 section 6 lets an implementation
// refuse numbers beyond its range, and prefsift does (docs/reasons.md).
TEST(RecordReader, MalformedValueInAnUnreadFieldRejectsTheLine) {
  Layout c = L(Json{{"preset", "choice"}});
  const std::string head = R"({"id":"a","prompt":"p","candidates":["a","b"],"choice":0,"note":)";
  for (const char* bad : {
           R"([1,2,])",       // section 5: no value after the last comma
           R"({"k":})",       // section 4: a member without a value
           R"(tru)",          // section 3: not a literal name
           R"("\q")",         // section 7: not an escape
           R"(01)",           // section 6: a leading zero
           R"(-)",            // section 6: a minus sign without digits
           R"(1.)",           // section 6: a fraction without digits
           R"(1e400)",        // section 6: beyond a double (an implementation's limit)
           R"({"k" 1})",      // section 4: no name separator
           R"(["a" "b"])",    // section 5: no value separator
       }) {
    SCOPED_TRACE(bad);
    EXPECT_EQ(Reason(c, head + bad + "}"), "not_json");
  }
  // Text after the object (section 2: one value per JSON text).
  EXPECT_EQ(Reason(c, head + "1} x"), "not_json");
  EXPECT_EQ(Reason(c, head + "1}}"), "not_json");
  EXPECT_EQ(Reason(c, head + "1}{}"), "not_json");
  // The same line with a well-formed value is kept.
  EXPECT_EQ(Reason(c, head + R"([1,{"k":"\n"},-0.5e-3,true,null])" + "}"), "ok");
}

TEST(RecordReader, ChoiceBaseOne) {
  Layout c = L(Json{{"preset", "choice"}, {"choice_base", 1}});
  EXPECT_EQ(Reason(c, R"({"id":"a","prompt":"p","candidates":["a","b"],"choice":2})"), "ok");
  EXPECT_EQ(Reason(c, R"({"id":"a","prompt":"p","candidates":["a","b"],"choice":0})"), "choice_out_of_range");
}

TEST(RecordReader, PairwiseLayout) {
  Layout p = L(Json{{"preset", "pairwise"}});
  RecordReader r(p, {});
  Record rec;
  RejectReason why;
  ASSERT_TRUE(r.Read(R"({"id":"a","prompt":"p","chosen":"good","rejected":"bad"})", "f:1", &rec, &why));
  EXPECT_EQ(rec.candidates, (std::vector<std::string>{"good", "bad"}));
  EXPECT_EQ(rec.chosen, 0);
  EXPECT_EQ(Reason(p, R"({"id":"a","prompt":"p","chosen":"good"})"), "missing_field");
}

}  // namespace
}  // namespace prefsift
