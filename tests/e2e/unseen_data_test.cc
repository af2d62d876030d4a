// End-to-end on data unlike samples/: the Harbourline Ferries customer chat
// (tests/e2e/unseen/generate_ferry_chat.py), where prompts, evaluation items
// and reference answers are written in templates. The run uses the default
// settings (the generated plan names the inputs and the evaluation set and
// turns the answer detector on, nothing else). Checked against the
// generator's truth.json:
//   * every planted leak (verbatim, also in upper case or re-spaced; one word
//     changed; embedded in a longer message; a copied reference answer) is
//     caught against its evaluation item, and no other record is flagged:
//     2,400 template-only records and 120 near-duplicate copies share stock
//     text with the evaluation items but copy none;
//   * every near-duplicate copy (upper case with a space before punctuation,
//     lower case with curly quotes and a dash, re-spaced punctuation) ends in
//     its original's cluster, or has the same prompt after normalisation;
//   * the planted length shortcut in a mixed-B (2, 3, 4) set, about 8 points
//     above the expected rate, is flagged with log1p_words carrying it.
// Seed 1 is the seed the defaults were tuned on; seed 2 was checked once
// after tuning (docs/detection-on-unseen-data.md gives both seeds' figures).
#include <gtest/gtest.h>

#include <filesystem>
#include <map>
#include <set>

#include "core/normalize.h"
#include "e2e_helpers.h"

namespace prefsift::e2e {
namespace {

using Json = nlohmann::ordered_json;

struct Run {
  std::string dir;
  Json truth, summary;
  std::map<std::string, Json> leak_lines;         // leakage.jsonl by record id
  std::map<std::string, std::string> prompt_of;  // prefs.jsonl: id -> question
  std::map<std::string, long long> cluster_of;   // clusters.jsonl
};

Run Generate(int seed) {
  Run r;
  r.dir = ::testing::TempDir() + "prefsift-ferry-" + std::to_string(seed) + "-" + std::to_string(::getpid());
  std::filesystem::create_directories(r.dir);
  std::string log;
  int rc = Shell(std::string(PREFSIFT_REF_PYTHON) + " " + SourceDir() + "/tests/e2e/unseen/generate_ferry_chat.py --seed " +
                     std::to_string(seed) + " --out " + r.dir,
                 &log);
  EXPECT_EQ(rc, 0) << log;
  rc = Shell(std::string(PREFSIFT_BINARY) + " run --plan " + r.dir + "/plan.json --overwrite -q", &log);
  EXPECT_EQ(rc, 0) << log;
  r.truth = Json::parse(ReadFile(r.dir + "/truth.json"));
  r.summary = Json::parse(ReadFile(r.dir + "/out/summary.json"));
  for (const auto& j : ReadJsonl(r.dir + "/out/leakage.jsonl")) r.leak_lines[j["id"].get<std::string>()] = j;
  for (const auto& j : ReadJsonl(r.dir + "/prefs.jsonl")) r.prompt_of[j["id"].get<std::string>()] = j["question"];
  for (const auto& c : ReadJsonl(r.dir + "/out/clusters.jsonl")) {
    for (const auto& m : c["members"]) r.cluster_of[m.get<std::string>()] = c["cluster"].get<long long>();
  }
  return r;
}

void CheckRun(const Run& r) {
  // Leakage: every planted leak caught against its item; nothing else.
  std::set<std::string> planted;
  for (const auto& leak : r.truth["leaks"]) {
    const std::string id = leak["id"];
    planted.insert(id);
    auto it = r.leak_lines.find(id);
    ASSERT_TRUE(it != r.leak_lines.end()) << "missed planted leak " << id << " (" << leak["kind"] << ")";
    bool item_ok = false;
    for (const auto& m : it->second["matches"]) item_ok = item_ok || m["eval_item"] == leak["eval_item"];
    EXPECT_TRUE(item_ok) << id << ": expected item " << leak["eval_item"];
    EXPECT_EQ(it->second["action"], "dropped") << id;
  }
  for (const auto& [id, j] : r.leak_lines) {
    EXPECT_TRUE(planted.count(id)) << "flagged a template-only record: " << id << " " << j.dump();
  }
  // The template text set aside is listed with its counts.
  const Json& tmpl = r.summary["stages"]["leakage"]["template_text"];
  EXPECT_GT(tmpl["ngram"]["grams_set_aside"].get<int>(), 0);
  EXPECT_GT(tmpl["answers"]["grams_set_aside"].get<int>(), 0);
  ASSERT_FALSE(tmpl["ngram"]["most_frequent"].empty());
  EXPECT_GE(tmpl["ngram"]["most_frequent"][0]["training_documents"].get<int>(), 10);

  // Near-duplicates: the copy is in its original's cluster, or the two
  // prompts are equal after normalisation (grouped as the same prompt).
  int together = 0;
  for (const auto& d : r.truth["near_dups"]) {
    const std::string a = d["id"], b = d["of"];
    auto ia = r.cluster_of.find(a), ib = r.cluster_of.find(b);
    const bool clustered = ia != r.cluster_of.end() && ib != r.cluster_of.end() && ia->second == ib->second;
    const bool same = NormalizeForMatch(r.prompt_of.at(a)) == NormalizeForMatch(r.prompt_of.at(b));
    EXPECT_TRUE(clustered || same) << a << " (" << d["kind"] << ") not with " << b;
    together += clustered || same;
  }
  EXPECT_EQ(together, 120);

  // Shortcut audit: flagged against the expected rate, carried by length.
  const Json& a = r.summary["stages"]["bias"]["shortcut_audit"];
  ASSERT_TRUE(a["ran"].get<bool>()) << a.dump();
  EXPECT_TRUE(a["flagged"].get<bool>()) << a.dump();
  EXPECT_LT(a["p_value"].get<double>(), 1e-6);
  EXPECT_GE(a["lift"].get<double>(), 0.05);
  EXPECT_LE(a["lift"].get<double>(), 0.12);
  EXPECT_GT(a["chance_accuracy"].get<double>(), a["uniform_chance"].get<double>());  // slot-biased raters
  ASSERT_FALSE(a["shortcut_features"].empty());
  EXPECT_EQ(a["shortcut_features"][0]["feature"], "log1p_words");
  std::cout << "seed " << r.truth["seed"] << ": shortcut accuracy " << a["heldout_accuracy"] << " expected "
            << a["chance_accuracy"] << " lift " << a["lift"] << " p " << a["p_value"] << "\n";
}

TEST(UnseenData, TuningSeedDefaultSettings) { CheckRun(Generate(1)); }

TEST(UnseenData, CheckSeedDefaultSettings) { CheckRun(Generate(2)); }

}  // namespace
}  // namespace prefsift::e2e
