// Stage "screen" on small temp files: settings errors, findings file, masking
// and pseudonymising in the right string (plain prompt, chat turn, candidate,
// metadata), drop with a masked rejects copy, and the no-echo property: no
// planted value appears in any output file or on stderr.
//
// Planted values are fake and reserved: e-mail under example.com/example.org
// (RFC 2606, from memory), a UK drama number 07700 900123 (Ofcom drama range
// [S]), a published test card 4111 1111 1111 1111 (common practice; Luhn-valid),
// an RFC 5737 address 203.0.113.7 [V].
#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include <cstdlib>
#include <filesystem>

#include "screen/rules.h"
#include "screen/screener.h"
#include "stages/screen/screen_stage.h"
#include "io/file_system.h"
#include "stages/run_helpers.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;
using testing::ReadFile;
using testing::ReadJsonl;
using testing::TempPath;
using testing::WriteFile;

const char* kEmail = "rowan.hale@example.com";
const char* kEmail2 = "ops-desk@example.org";
const char* kPhone = "07700 900123";
const char* kCard = "4111 1111 1111 1111";
const char* kIp = "203.0.113.7";

// The repository's rules/ folder, found from this file's path.
std::string RulesDir() {
  return (std::filesystem::path(PREFSIFT_TEST_SOURCE_DIR) / "rules").string();
}

// Three records in a custom layout with chat prompts and metadata.
std::string Corpus() {
  Json a{{"id", "r1"},
         {"turns", Json::array({Json{{"role", "user"}, {"content", "Hello there"}},
                                Json{{"role", "user"}, {"content", std::string("mail ") + kEmail + " or " + kEmail2 +
                                                                       ", phone " + kPhone}}})},
         {"answers", {"I will write to " + std::string(kEmail) + " today.", "No personal data here at all."}},
         {"pick", 0},
         {"meta", {{"note", std::string("seen from ") + kIp}, {"tags", {"x", kEmail2}}}}};
  Json b{{"id", "r2"},
         {"turns", Json::array({Json{{"role", "user"}, {"content", "How do I sow carrots?"}}})},
         {"answers", {"Thinly, in rows.", "Deeply."}},
         {"pick", 1}};
  Json c{{"id", "r3"},
         {"turns", Json::array({Json{{"role", "user"}, {"content", std::string("My card is ") + kCard + ", mail " + kEmail}}})},
         {"answers", {"Please do not share card numbers.", "Sure."}},
         {"pick", 0}};
  return a.dump() + "\n" + b.dump() + "\n" + c.dump() + "\n";
}

Json Layout() {
  return Json{{"id", "/id"}, {"prompt", "/turns"}, {"candidates", "/answers"}, {"choice", "/pick"}, {"metadata", "/meta"}};
}

Plan MakePlan(const std::string& tag, const Json& screen) {
  std::string in = WriteFile("pd_" + tag + ".jsonl", Corpus());
  Plan plan = testing::PlanFor({in}, Layout(), TempPath("pd_out_" + tag));
  plan.threads = 1;
  Json s = screen;
  if (!s.contains("rules_dir")) s["rules_dir"] = RulesDir();
  plan.stages["screen"] = s;
  return plan;
}

Result<RunOutcome> RunScreen(const Plan& plan, std::string* log_text = nullptr) {
  PipelineOptions opt;
  opt.stages = {"screen"};
  opt.progress = false;
  opt.table = false;
  char* buf = nullptr;
  size_t len = 0;
  std::FILE* log = open_memstream(&buf, &len);
  auto r = RunPipeline(plan, opt, DefaultFileSystem(), log);
  std::fclose(log);
  if (log_text) *log_text = std::string(buf, len);
  std::free(buf);
  return r;
}

std::string AllOutputBytes(const std::string& dir) {
  std::string all;
  for (const auto& e : std::filesystem::recursive_directory_iterator(dir)) {
    if (e.is_regular_file()) all += ReadFile(e.path().string());
  }
  return all;
}

std::map<std::string, Json> KeptById(const std::string& dir) {
  std::map<std::string, Json> m;
  for (auto& j : ReadJsonl(dir + "/kept.jsonl")) m[j["id"].get<std::string>()] = j;
  return m;
}

TEST(PersonalDataStage, MasksEveryPlantedValueInTheRightString) {
  Plan plan = MakePlan("mask", Json{{"action", "mask"}});
  std::string log;
  auto r = RunScreen(plan, &log);
  ASSERT_TRUE(r.ok()) << r.status().message();
  auto kept = KeptById(plan.output);
  ASSERT_EQ(kept.size(), 3u);
  // Chat prompt: only turn 1 changes; both e-mails and the phone are masked,
  // and the text between them is intact (offsets stay right with several spans).
  EXPECT_EQ(kept["r1"]["turns"][0]["content"], "Hello there");
  EXPECT_EQ(kept["r1"]["turns"][1]["content"],
            "mail [[masked:mailbox-address]] or [[masked:mailbox-address]], phone [[masked:phone-british-standard-grouping]]");
  EXPECT_EQ(kept["r1"]["answers"][0], "I will write to [[masked:mailbox-address]] today.");
  EXPECT_EQ(kept["r1"]["answers"][1], "No personal data here at all.");
  EXPECT_EQ(kept["r1"]["meta"]["note"], "seen from [[masked:ipv4-address]]");
  EXPECT_EQ(kept["r1"]["meta"]["tags"][1], "[[masked:mailbox-address]]");
  // An untouched record is copied byte for byte.
  EXPECT_EQ(kept["r2"]["answers"][0], "Thinly, in rows.");

  auto findings = ReadJsonl(plan.output + "/personal_data_findings.jsonl");
  ASSERT_EQ(findings.size(), 8u);
  EXPECT_EQ(findings[0]["id"], "r1");
  EXPECT_EQ(findings[0]["field"], "prompt");
  EXPECT_EQ(findings[0]["turn"], 1);
  EXPECT_EQ(findings[0]["pointer"], "/turns/1/content");
  EXPECT_EQ(findings[0]["kind"], "mailbox-address");
  EXPECT_EQ(findings[0]["begin"], 5);
  EXPECT_EQ(findings[0]["end"], 5 + std::string(kEmail).size());
  EXPECT_EQ(findings[0]["line"], 1);
  bool saw_candidate = false, saw_meta = false;
  for (auto& f : findings) {
    if (f["field"] == "candidates") {
      saw_candidate = true;
      EXPECT_EQ(f["candidate"], 0);
      EXPECT_EQ(f["pointer"], "/answers/0");
    }
    if (f["pointer"] == "/meta/tags/1") saw_meta = f["field"] == "metadata";
  }
  EXPECT_TRUE(saw_candidate);
  EXPECT_TRUE(saw_meta);

  Json summary = Json::parse(ReadFile(plan.output + "/summary.json"));
  const Json& s = summary["stages"]["screen"];
  EXPECT_EQ(s["findings"], 8);
  EXPECT_EQ(s["by_rule"]["mailbox-address"]["findings"], 5);
  EXPECT_EQ(s["by_field"]["prompt"], 5);
  EXPECT_EQ(s["by_field"]["candidates"], 1);
  EXPECT_EQ(s["by_field"]["metadata"], 2);
  EXPECT_EQ(s["records_with_findings"], 2);
  EXPECT_GE(s["cautions"].size(), 3u);

  std::string all = AllOutputBytes(plan.output) + log;
  for (const char* v : {kEmail, kEmail2, kPhone, kCard, kIp}) EXPECT_EQ(all.find(v), std::string::npos) << v;
}

TEST(PersonalDataStage, PseudonymiseIsKeyedStableAndNeverEchoesTheKeyOrValues) {
  const std::string key = "unit-test-key-0123456789abcdef";
  std::string key_path = WriteFile("pd_key.txt", key + "\n");
  Plan plan = MakePlan("pseudo", Json{{"action", "mask"},
                                      {"action_by_kind", {{"mailbox-address", "pseudonymise"}}},
                                      {"key_file", key_path}});
  std::string log;
  auto r = RunScreen(plan, &log);
  ASSERT_TRUE(r.ok()) << r.status().message();
  auto kept = KeptById(plan.output);
  std::string turn = kept["r1"]["turns"][1]["content"];
  std::string cand = kept["r1"]["answers"][0];
  // Same e-mail, same pseudonym (in the prompt and in a candidate); a different e-mail, a different one.
  auto first_pseudo = [](const std::string& s) { return s.substr(s.find("[[pseudo:"), 39); };
  EXPECT_EQ(first_pseudo(turn).size(), 39u);  // "[[pseudo:mailbox-address:" + 12 hex + "]]"
  EXPECT_EQ(first_pseudo(turn), first_pseudo(cand));
  std::string second = turn.substr(turn.find("[[pseudo:", 6));
  EXPECT_NE(second.substr(0, 39), first_pseudo(turn));
  Json summary = Json::parse(ReadFile(plan.output + "/summary.json"));
  EXPECT_EQ(summary["stages"]["screen"]["pseudonym_key"], "from key_file (never written)");
  std::string all = AllOutputBytes(plan.output) + log;
  for (const char* v : {kEmail, kEmail2, kPhone, kCard, kIp}) EXPECT_EQ(all.find(v), std::string::npos) << v;
  EXPECT_EQ(all.find(key), std::string::npos);
  // The key file's path is not secret; summary.json echoes the plan's settings, path included.
}

TEST(PersonalDataStage, DropRejectsAndTheRejectsCopyIsMasked) {
  Plan plan = MakePlan("drop", Json{{"action", "flag"}, {"action_by_kind", {{"card-number", "drop"}}}});
  std::string log;
  auto r = RunScreen(plan, &log);
  ASSERT_TRUE(r.ok()) << r.status().message();
  auto rejects = ReadJsonl(plan.output + "/rejects.jsonl");
  ASSERT_EQ(rejects.size(), 1u);
  EXPECT_EQ(rejects[0]["id"], "r3");
  EXPECT_EQ(rejects[0]["stage"], "screen");
  EXPECT_EQ(rejects[0]["reason"], "personal_data");
  EXPECT_EQ(rejects[0]["detail"]["kinds"], Json::array({"card-number"}));
  EXPECT_EQ(rejects[0]["field"], "/turns/0/content");
  // Everything found in the dropped record is masked, flag findings included.
  EXPECT_EQ(rejects[0]["record"]["turns"][0]["content"],
            "My card is [[masked:card-number]], mail [[masked:mailbox-address]]");
  // Flagged records pass unchanged.
  auto kept = KeptById(plan.output);
  EXPECT_EQ(kept["r1"]["answers"][0], "I will write to " + std::string(kEmail) + " today.");
  // The dropped record's values are nowhere; flagged ones stay only in the kept data.
  std::string rejects_text = ReadFile(plan.output + "/rejects.jsonl");
  EXPECT_EQ(rejects_text.find(kCard), std::string::npos);
  EXPECT_EQ(rejects_text.find(kEmail), std::string::npos);
  EXPECT_EQ(ReadFile(plan.output + "/personal_data_findings.jsonl").find(kEmail), std::string::npos);
  EXPECT_EQ(ReadFile(plan.output + "/summary.json").find(kEmail), std::string::npos);
  EXPECT_EQ(log.find(kEmail), std::string::npos);
}

TEST(PersonalDataStage, SameOutputWhateverTheThreadCount) {
  // Many records so the parallel path is taken (ParallelFor needs >= 64).
  std::string body;
  for (int i = 0; i < 300; ++i) {
    body += Json{{"id", "t" + std::to_string(i)},
                 {"turns", Json::array({Json{{"role", "user"},
                                             {"content", "write to user" + std::to_string(i) + "@example.com please"}}})},
                 {"answers", {"ok " + std::to_string(i), "no"}},
                 {"pick", 0}}
                .dump() +
            "\n";
  }
  std::string in = WriteFile("pd_threads.jsonl", body);
  std::string outs[2];
  for (int t = 0; t < 2; ++t) {
    Plan plan = testing::PlanFor({in}, Layout(), TempPath("pd_threads_out" + std::to_string(t)));
    plan.threads = t == 0 ? 1 : 4;
    plan.stages["screen"] = Json{{"rules_dir", RulesDir()}, {"action", "mask"}};
    auto r = RunScreen(plan);
    ASSERT_TRUE(r.ok()) << r.status().message();
    outs[t] = ReadFile(plan.output + "/kept.jsonl") + ReadFile(plan.output + "/personal_data_findings.jsonl");
  }
  EXPECT_EQ(outs[0], outs[1]);
  EXPECT_NE(outs[0].find("[[masked:mailbox-address]]"), std::string::npos);
}

TEST(PersonalDataStage, SettingsErrorsNameTheSetting) {
  auto err = [](const Json& s) {
    Plan plan = MakePlan("err", s);
    auto r = RunScreen(plan);
    EXPECT_FALSE(r.ok());
    EXPECT_EQ(r.status().code(), StatusCode::kUsage);
    return r.status().message();
  };
  EXPECT_NE(err(Json{{"colour", "red"}}).find("\"colour\""), std::string::npos);
  EXPECT_NE(err(Json{{"action", "shred"}}).find("stages.screen.action"), std::string::npos);
  EXPECT_NE(err(Json{{"action_by_kind", {{"no-such-kind", "mask"}}}}).find("no-such-kind"), std::string::npos);
  // The old setting names fail with a message that names the new ones.
  EXPECT_NE(err(Json{{"actions", {{"mailbox-address", "mask"}}}}).find("action_by_kind"), std::string::npos);
  EXPECT_NE(err(Json{{"min_confidence", 0.5}}).find("certainty_floor"), std::string::npos);
  // Pseudonymise without a key names the settings that give one.
  std::string m = err(Json{{"action_by_kind", {{"mailbox-address", "pseudonymise"}}}});
  EXPECT_NE(m.find("key_file"), std::string::npos);
  EXPECT_NE(m.find("key_env"), std::string::npos);
  EXPECT_NE(err(Json{{"key_env", "PREFSIFT_TEST_SURELY_UNSET_VAR"}}).find("PREFSIFT_TEST_SURELY_UNSET_VAR"),
            std::string::npos);
  std::string short_key = WriteFile("pd_short_key.txt", "short");
  EXPECT_NE(err(Json{{"key_file", short_key}}).find("16 bytes"), std::string::npos);
  EXPECT_NE(err(Json{{"fields", {"prompt", "footnotes"}}}).find("footnotes"), std::string::npos);
}

// A made-up name (a given name from the shipped list and an invented
// surname) in a chat turn, a candidate and metadata of one record: the same
// keyed pseudonym everywhere, a different one for another name, never the name.
TEST(PersonalDataStage, PseudonymisedNameAgreesAcrossTheRecord) {
  const std::string name = "Rosalind Quillfeather";
  Json rec{{"id", "n1"},
           {"turns", Json::array({Json{{"role", "user"}, {"content", "Hello, my name is " + name + " and the drill is stuck."}}})},
           {"answers", {"Dear " + name + ",\nplease bring it back.", "Hi Ethelind Ashcombe! Try the other bit."}},
           {"pick", 0},
           {"meta", {{"note", "Thanks,\n" + name}}}};
  std::string in = WriteFile("pd_names.jsonl", rec.dump() + "\n");
  Plan plan = testing::PlanFor({in}, Layout(), TempPath("pd_out_names"));
  plan.threads = 1;
  std::string key_path = WriteFile("pd_names_key.txt", "names-test-key-0123456789abcdef\n");
  plan.stages["screen"] = Json{{"rules_dir", RulesDir()}, {"action_by_kind", {{"person-name", "pseudonymise"}}},
                               {"key_file", key_path}};
  auto r = RunScreen(plan);
  ASSERT_TRUE(r.ok()) << r.status().message();
  Json kept = KeptById(plan.output)["n1"];
  std::string turn = kept["turns"][0]["content"], cand = kept["answers"][0], other = kept["answers"][1];
  std::string note = kept["meta"]["note"];
  auto token = [](const std::string& s) {
    size_t p = s.find("[[pseudo:person-name:");
    return p == std::string::npos ? std::string() : s.substr(p, std::string("[[pseudo:person-name:").size() + 14);
  };
  ASSERT_FALSE(token(turn).empty()) << turn;
  EXPECT_EQ(token(turn), token(cand)) << cand;
  EXPECT_EQ(token(turn), token(note)) << note;
  ASSERT_FALSE(token(other).empty()) << other;
  EXPECT_NE(token(turn), token(other));
  std::string all = AllOutputBytes(plan.output);
  EXPECT_EQ(all.find("Quillfeather"), std::string::npos);
  EXPECT_EQ(all.find("Ashcombe"), std::string::npos);
}

TEST(PersonalDataStage, KeyFromEnvironment) {
  ::setenv("PREFSIFT_TEST_PSEUDO_KEY", "environment-key-0123456789", 1);
  Plan plan = MakePlan("env", Json{{"action", "pseudonymise"}, {"key_env", "PREFSIFT_TEST_PSEUDO_KEY"}});
  auto r = RunScreen(plan);
  ASSERT_TRUE(r.ok()) << r.status().message();
  std::string all = AllOutputBytes(plan.output);
  EXPECT_EQ(all.find("environment-key-0123456789"), std::string::npos);
  EXPECT_EQ(all.find(kEmail), std::string::npos);
  EXPECT_NE(all.find("[[pseudo:mailbox-address:"), std::string::npos);
  ::unsetenv("PREFSIFT_TEST_PSEUDO_KEY");
}

TEST(PersonalDataStage, BadRuleFileStopsTheRunNamingFileLineRuleAndRe2Message) {
  std::string dir = TempPath("pd_bad_rules");
  std::filesystem::create_directories(dir);
  WriteFile("pd_bad_rules/broken.json",
            "{\n  \"pack\": \"broken\",\n  \"rules\": [\n    {\n      \"kind\": \"broken-paren\",\n"
            "      \"shape\": \"(ab\"\n    }\n  ]\n}\n");
  Plan plan = MakePlan("badrules", Json{{"rules_dir", dir}});
  auto r = RunScreen(plan);
  ASSERT_FALSE(r.ok());
  EXPECT_EQ(r.status().code(), StatusCode::kUsage);  // exit 2
  const std::string& m = r.status().message();
  EXPECT_NE(m.find("broken.json"), std::string::npos) << m;
  EXPECT_NE(m.find("5"), std::string::npos) << m;  // the line of the rule's id
  EXPECT_NE(m.find("broken-paren"), std::string::npos) << m;
  EXPECT_NE(m.find("missing )"), std::string::npos) << m;  // RE2's own message
  EXPECT_FALSE(std::filesystem::exists(plan.output + "/summary.json"));
}

// Rule fixes made while integrating the stage (rules/*.json), checked on the
// shipped packs. Values: an IBAN with wrong check digits (ISO 13616 example
// GB82 WEST 1234 5698 7654 32 [V] with the check digits changed), order
// numbers, a voided SSN (SSA, from memory), UK drama numbers (Ofcom [S]).
TEST(PersonalDataRules, FixesMadeDuringIntegration) {
  std::vector<std::string> packs;
  for (const auto& e : std::filesystem::directory_iterator(RulesDir())) {
    if (e.path().extension() == ".json") packs.push_back(e.path().string());
  }
  std::sort(packs.begin(), packs.end());
  auto rules = screen::LoadRulePacks(DefaultFileSystem(), packs, RulesDir());
  ASSERT_TRUE(rules.ok()) << rules.status().message();
  auto sc = screen::Screener::Build(rules.value());
  ASSERT_TRUE(sc.ok()) << sc.status().message();
  auto ids = [&](const std::string& text) {
    auto f = sc.value().Scan(text, screen::FieldKind::kPrompt);
    EXPECT_TRUE(f.ok());
    std::vector<std::string> out;
    for (auto& x : f.value()) out.push_back(x.rule_id);
    return out;
  };
  using V = std::vector<std::string>;
  // The tail of an IBAN with bad check digits is neither a card nor an Aadhaar number.
  EXPECT_EQ(ids("The number GB81 TEST 3806 5144 5045 51 printed on the leaflet"), V{});
  EXPECT_EQ(ids("The number GB85 TEST 5102 1236 9164 13 printed on the leaflet"), V{});
  // Order numbers grouped 8-4 are not Aadhaar numbers (4-4-4).
  EXPECT_EQ(ids("My order 20260516-6981 for the kit"), V{});
  // A test card is still found on its own.
  EXPECT_EQ(ids("card 4111 1111 1111 1111 expires"), V{"card-number"});
  // Voided SSNs are masked like SSNs (not taken as Japanese phone numbers).
  EXPECT_EQ(ids("Never write a number like 078-05-1120 on forms"), V{"us-social-security-number-voided"});
  // UK national numbers with the area code in parentheses, after "message".
  // (Since issue 16 these standard groupings are found without the word, by
  // phone-british-standard-grouping; other groupings still need it.)
  EXPECT_EQ(ids("Leave a message on (020) 7946 0450 if nobody answers."), V{"phone-british-standard-grouping"});
  EXPECT_EQ(ids("Leave a message on 01632 960022 if nobody answers."), V{"phone-british-standard-grouping"});
  EXPECT_EQ(ids("Leave a message on 0163 296 0022 if nobody answers."), V{"phone-british-national-form"});
  EXPECT_EQ(ids("Please use 0163 296 0022 if nobody answers."), V{});
  // A token assigned to a secret-sounding name, letters only (no digits).
  EXPECT_EQ(ids("The old setting token=AyJwzWJbIXIWqTBPeGEUAYCehlpkQhRpMkMAXjcB was revoked"),
            V{"labelled-secret-value"});
}

}  // namespace
}  // namespace prefsift
