#include "core/layout.h"

#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

TEST(Layout, PresetsAreComplete) {
  for (const auto& name : LayoutPresetNames()) {
    auto l = LayoutFromJson(Json{{"preset", name}}, "t");
    EXPECT_TRUE(l.ok()) << name << ": " << l.status().message();
  }
}

TEST(Layout, CustomPointersOverridePreset) {
  auto l = LayoutFromJson(Json{{"preset", "choice"}, {"prompt", "/ask"}, {"candidates", "/replies"},
                               {"candidate_text", "/text"}, {"choice", "/pick"}},
                          "t");
  ASSERT_TRUE(l.ok()) << l.status().message();
  EXPECT_EQ(l.value().prompt.text, "/ask");
  EXPECT_EQ(l.value().candidate_text.text, "/text");
  EXPECT_EQ(l.value().judgment, JudgmentShape::kChoice);
}

TEST(Layout, UserJudgmentReplacesPresetJudgment) {
  auto l = LayoutFromJson(Json{{"preset", "choice"}, {"ranks", "/ranking"}}, "t");
  ASSERT_TRUE(l.ok()) << l.status().message();
  EXPECT_EQ(l.value().judgment, JudgmentShape::kRanks);
  EXPECT_EQ(l.value().ranking.text, "/ranking");
}

TEST(Layout, Errors) {
  EXPECT_FALSE(LayoutFromJson(Json{{"preset", "nope"}}, "t").ok());
  EXPECT_FALSE(LayoutFromJson(Json{{"prompt", "/p"}, {"candidates", "/c"}}, "t").ok());  // no judgment
  EXPECT_FALSE(LayoutFromJson(Json{{"prompt", "/p"}, {"candidates", "/c"}, {"choice", "/x"}, {"ranks", "/r"}}, "t").ok());
  EXPECT_FALSE(LayoutFromJson(Json{{"prompt", "/p"}, {"chosen", "/c"}}, "t").ok());  // rejected missing
  auto typo = LayoutFromJson(Json{{"preset", "pairwise"}, {"promt", "/q"}}, "plan.json: inputs[0].layout");
  ASSERT_FALSE(typo.ok());
  EXPECT_NE(typo.status().message().find("promt"), std::string::npos);
  EXPECT_NE(typo.status().message().find("inputs[0].layout"), std::string::npos);
}

}  // namespace
}  // namespace prefsift
