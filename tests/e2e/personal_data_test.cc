// Stage "screen" end to end on the samples, scored against the planted ground
// truth (samples/truth.json "personal_data": planted values and decoys; the
// values come from reserved or published test ranges, see samples/README.md).
//
// A finding matches a planted value when the record id, the field, the
// candidate index (via the JSON Pointer of the string) and the rule family
// match and the byte spans overlap. Recall and precision are printed per
// family and must be >= 0.99 and >= 0.98 (targets set by the lead; common
// practice for a gate, not a published figure).
//
// No-echo: the screen is run with the demo plan (mask, pseudonymise e-mails,
// drop private keys) and again with every rule set to pseudonymise; no output
// file and nothing printed may contain any planted value or decoy, nor the key.
#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include <unistd.h>

#include <filesystem>
#include <fstream>
#include <iomanip>
#include <iostream>
#include <map>
#include <set>
#include <sstream>

#include "e2e/e2e_helpers.h"

namespace prefsift::e2e {
namespace {

using Json = nlohmann::ordered_json;

// A finding's family is its rule pack's name ("family" in the findings file),
// which is the family name used in samples/truth.json.
std::string FamilyOf(const Json& finding) { return finding["family"].get<std::string>(); }

std::string Binary() { return PREFSIFT_BINARY; }

// Runs `prefsift screen` on the demo plan with the screen settings replaced by
// `screen` (null: as in the demo plan). Returns the output folder.
std::string RunScreen(const std::string& tag, const Json& screen, std::string* log) {
  std::string samples = SourceDir() + "/samples";
  Json plan = Json::parse(ReadFile(samples + "/demo-plan.json"), nullptr, true, /*ignore_comments=*/true);
  for (auto& in : plan["inputs"]) in["path"] = samples + "/" + in["path"].get<std::string>();
  Json& s = plan["stages"]["screen"];
  if (!screen.is_null()) s = screen;
  if (s.contains("key_file")) s["key_file"] = samples + "/" + s["key_file"].get<std::string>();
  s["rules_dir"] = SourceDir() + "/rules";
  std::string dir = ::testing::TempDir() + "prefsift-screen-" + tag + "-" + std::to_string(::getpid());
  std::string plan_path = dir + ".plan.json";
  std::filesystem::remove_all(dir);
  {
    std::ofstream(plan_path) << plan.dump(2);
  }
  int rc = Shell(Binary() + " screen --plan " + plan_path + " --out " + dir + " --overwrite", log);
  EXPECT_EQ(rc, 0) << *log;
  return dir;
}

const std::string& DemoScreen() {
  static std::string log;
  static const std::string dir = RunScreen("demo", Json(), &log);
  return dir;
}

struct Planted {
  std::string id, pointer, field, family, value;
  int64_t cand = -1;
  size_t begin = 0, end = 0;
};

std::vector<Planted> Load(const char* key) {
  std::vector<Planted> out;
  for (const auto& p : Truth()["personal_data"][key]) {
    Planted x;
    x.id = p["id"];
    x.pointer = p["pointer"];
    x.field = p["field"] == "candidate" ? "candidates" : p["field"].get<std::string>();
    x.family = p["family"];
    x.value = p["value"];
    if (p["candidate_index"].is_number()) x.cand = p["candidate_index"];
    x.begin = p["byte_start"];
    x.end = p["byte_end"];
    out.push_back(x);
  }
  return out;
}

bool Matches(const Json& f, const Planted& p, bool same_family) {
  if (f["id"] != p.id || f["pointer"] != p.pointer || f["field"] != p.field) return false;
  if (p.cand >= 0 && (!f.contains("candidate") || f["candidate"] != p.cand)) return false;
  if (same_family && FamilyOf(f) != p.family) return false;
  size_t b = f["begin"], e = f["end"];
  return b < p.end && p.begin < e;
}

TEST(PersonalDataE2E, RecallAndPrecisionPerFamilyOnPlantedValues) {
  auto findings = ReadJsonl(DemoScreen() + "/personal_data_findings.jsonl");
  auto planted = Load("planted");
  ASSERT_EQ(planted.size(), 151u);  // samples/README.md: "Planted (151)"
  std::map<std::string, int> found, total, true_pos, reported;
  std::vector<char> used(findings.size(), 0);
  for (const auto& p : planted) {
    ++total[p.family];
    bool hit = false;
    for (size_t i = 0; i < findings.size(); ++i) {
      if (Matches(findings[i], p, true)) {
        hit = true;
        used[i] = 1;
      }
    }
    if (hit) ++found[p.family];
    else ADD_FAILURE() << "missed " << p.family << " in " << p.id << " " << p.pointer << " bytes " << p.begin << "-"
                       << p.end;
  }
  for (size_t i = 0; i < findings.size(); ++i) {
    std::string fam = FamilyOf(findings[i]);
    ++reported[fam];
    if (used[i]) ++true_pos[fam];
    else if (fam != "people") std::cout << "[screen] unmatched finding " << findings[i].dump() << "\n";
  }
  std::set<std::string> families;
  for (auto& [k, v] : total) families.insert(k);
  for (auto& [k, v] : reported) families.insert(k);
  for (const auto& fam : families) {
    double recall = total[fam] ? double(found[fam]) / total[fam] : 1.0;
    double precision = reported[fam] ? double(true_pos[fam]) / reported[fam] : 1.0;
    std::cout << "[screen] family " << std::left << std::setw(11) << fam << " planted " << std::setw(3) << total[fam]
              << " found " << std::setw(3) << found[fam] << " recall " << std::fixed << std::setprecision(3) << recall
              << "  findings " << std::setw(3) << reported[fam] << " matched " << std::setw(3) << true_pos[fam]
              << " precision " << precision << "\n";
    // The samples plant no names or postal addresses (family "people"); those
    // kinds are scored on their own corpus (tests/screen/people_test.cc), so
    // here their findings are printed, not gated.
    if (total[fam] == 0 && fam == "people") continue;
    EXPECT_GE(recall, 0.99) << fam;
    EXPECT_GE(precision, 0.98) << fam;
  }
}

TEST(PersonalDataE2E, NoDecoyIsReported) {
  auto findings = ReadJsonl(DemoScreen() + "/personal_data_findings.jsonl");
  auto decoys = Load("decoys");
  ASSERT_EQ(decoys.size(), 57u);  // samples/README.md: "Decoys (57, ...)"
  int reported = 0;
  for (const auto& d : decoys) {
    for (const auto& f : findings) {
      if (Matches(f, d, false)) {
        ++reported;
        ADD_FAILURE() << "decoy " << d.family << " reported by " << f["kind"] << " in " << d.id << " " << d.pointer;
      }
    }
  }
  std::cout << "[screen] decoys " << decoys.size() << " reported " << reported << "\n";
}

// Every file in `dir` plus `log`, as one string.
std::string Everything(const std::string& dir, const std::string& log) {
  std::string all = log;
  for (const auto& e : std::filesystem::recursive_directory_iterator(dir)) {
    if (e.is_regular_file()) all += ReadFile(e.path().string());
  }
  return all;
}

void ExpectNoEcho(const std::string& dir, const std::string& log) {
  ASSERT_TRUE(std::filesystem::exists(dir + "/rejects.jsonl"));
  ASSERT_TRUE(std::filesystem::exists(dir + "/summary.json"));
  ASSERT_TRUE(std::filesystem::exists(dir + "/personal_data_findings.jsonl"));
  std::string all = Everything(dir, log);
  int checked = 0;
  for (const char* key : {"planted", "decoys"}) {
    for (const auto& p : Load(key)) {
      // Decoys are not personal data and stay in the text; only planted values must vanish.
      if (std::string(key) == "decoys") continue;
      ++checked;
      EXPECT_EQ(all.find(p.value), std::string::npos) << p.family << " value of " << p.id << " appears in the output";
    }
  }
  EXPECT_EQ(checked, 151);
  std::string key = ReadFile(SourceDir() + "/samples/demo-pseudonym-key.txt");
  while (!key.empty() && key.back() == '\n') key.pop_back();
  EXPECT_EQ(all.find(key), std::string::npos) << "the pseudonym key appears in the output";
}

TEST(PersonalDataE2E, DemoSettingsEchoNoPlantedValue) {
  std::string log;
  std::string dir = RunScreen("noecho-demo", Json(), &log);
  ExpectNoEcho(dir, log);
  Json summary = Json::parse(ReadFile(dir + "/summary.json"));
  const Json& s = summary["stages"]["screen"];
  EXPECT_GT(s["by_action"]["pseudonymise"].get<int>(), 0);
  EXPECT_GT(s["by_action"]["mask"].get<int>(), 0);
  EXPECT_EQ(s["records_dropped"], 3);  // samples/README.md: secrets/private_key_pem 3, one per record
  std::cout << "[screen] demo: findings " << s["findings"] << ", records with findings " << s["records_with_findings"]
            << ", rewritten " << s["records_rewritten"] << ", dropped " << s["records_dropped"] << "\n";
}

TEST(PersonalDataE2E, PseudonymiseEverythingEchoesNoPlantedValue) {
  std::string log;
  std::string dir = RunScreen("noecho-pseudo", Json{{"action", "pseudonymise"}, {"key_file", "demo-pseudonym-key.txt"}},
                              &log);
  ExpectNoEcho(dir, log);
  EXPECT_NE(ReadFile(dir + "/kept.comparisons.jsonl").find("[[pseudo:"), std::string::npos);
}

TEST(PersonalDataE2E, MaskEverythingEchoesNoPlantedValue) {
  std::string log;
  std::string dir = RunScreen("noecho-mask", Json{{"action", "mask"}}, &log);
  ExpectNoEcho(dir, log);
}

TEST(PersonalDataE2E, FullDemoRunEchoesNoPlantedValue) {
  // The whole pipeline with the demo plan (every stage).
  ExpectNoEcho(DemoOutput(), "");
  EXPECT_TRUE(DemoSummary()["stages"].contains("screen"));
}

// summary.json's examples, worked out again from the findings file with a
// plain parse of every line: one example per kind (its first finding in file
// order), and each reject example carrying the masked forms of its record's
// findings. (The run skips most lines without parsing them whole; this checks
// that it skips none it needed.)
TEST(PersonalDataE2E, ExamplesAreTheFirstFindingOfEachKindAndTheRejectsFindings) {
  const std::string dir = DemoOutput();
  Json summary = Json::parse(ReadFile(dir + "/summary.json"));
  const Json& ex = summary["examples"];
  Json by_kind = Json::array();
  std::set<std::string> kinds;
  std::map<std::pair<std::string, uint64_t>, Json> masked_of;
  std::istringstream lines(ReadFile(dir + "/personal_data_findings.jsonl"));
  for (std::string line; std::getline(lines, line);) {
    Json f = Json::parse(line);
    Json m{{"kind", f["kind"]}, {"pointer", f["pointer"]}, {"preview", f["preview"]}, {"applied", f["applied"]}};
    masked_of[{f["input"].get<std::string>(), f["line"].get<uint64_t>()}].push_back(m);
    if (!kinds.insert(f["kind"].get<std::string>()).second) continue;
    m["input"] = f["input"];
    m["line"] = f["line"];
    m["id"] = f["id"];
    by_kind.push_back(m);
  }
  ASSERT_GE(kinds.size(), 3u);
  EXPECT_EQ(ex["personal_data"], by_kind);
  size_t with_findings = 0;
  for (const Json& r : ex["rejects"]) {
    auto it = masked_of.find({r["input"].get<std::string>(), r["line"].get<uint64_t>()});
    if (it == masked_of.end()) {
      EXPECT_FALSE(r.contains("masked")) << r.dump();
      continue;
    }
    ++with_findings;
    EXPECT_EQ(r["masked"], it->second) << r.dump();
  }
  std::cout << "[screen] demo examples: " << by_kind.size() << " kinds, " << ex["rejects"].size()
            << " reject examples, " << with_findings << " with findings\n";
}

TEST(PersonalDataE2E, SameOutputWithOneAndFourThreads) {
  std::string samples = SourceDir() + "/samples";
  std::string outs[2];
  for (int t = 0; t < 2; ++t) {
    std::string log;
    std::string dir = ::testing::TempDir() + "prefsift-screen-threads" + std::to_string(t) + "-" + std::to_string(::getpid());
    int rc = Shell(Binary() + " screen --plan " + samples + "/demo-plan.json --out " + dir + " --overwrite --threads " +
                       (t == 0 ? "1" : "4"),
                   &log);
    ASSERT_EQ(rc, 0) << log;
    outs[t] = ReadFile(dir + "/personal_data_findings.jsonl") + ReadFile(dir + "/rejects.jsonl") +
              ReadFile(dir + "/kept.comparisons.jsonl");
  }
  EXPECT_EQ(outs[0], outs[1]);
}

}  // namespace
}  // namespace prefsift::e2e
