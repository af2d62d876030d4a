// End-to-end: the leakage stage on the demo data finds every planted leak of
// samples/truth.json ("leaks": verbatim, edited, embedded prompts and copied
// reference answers) with the right evaluation set and item, and flags no
// other record. Also the `prefsift audit` command through the binary on two
// hand-made files, including the --gate exit code (4, docs/cli.md).
#include <gtest/gtest.h>

#include <cstdio>
#include <fstream>
#include <set>

#include "e2e_helpers.h"

namespace prefsift::e2e {
namespace {

using Json = nlohmann::ordered_json;

std::string ItemString(const Json& v) { return v.is_string() ? v.get<std::string>() : std::to_string(v.get<long long>()); }

TEST(Leakage, FindsEveryPlantedLeakAndNothingElse) {
  std::map<std::string, Json> found;  // record id -> leakage.jsonl line
  for (const auto& j : ReadJsonl(DemoOutput() + "/leakage.jsonl")) found[j["id"].get<std::string>()] = j;
  std::set<std::string> planted;
  for (const auto& leak : Truth()["leaks"]) {
    std::string id = leak["id"].get<std::string>();
    planted.insert(id);
    ASSERT_TRUE(found.count(id)) << "missed planted leak " << id << " (" << leak["kind"] << ")";
    bool item_ok = false;
    for (const auto& m : found[id]["matches"]) {
      item_ok = item_ok || (m["eval_set"] == leak["eval_set"] && m["eval_item"] == ItemString(leak["eval_item"]));
    }
    EXPECT_TRUE(item_ok) << id << ": expected " << leak["eval_set"] << " item " << leak["eval_item"];
    if (leak["field"] == "candidate") {
      EXPECT_EQ(found[id]["matches"][0]["detector"], "answer") << id;
      EXPECT_EQ(found[id]["matches"][0]["candidate"], leak["candidate_index"]) << id;
    }
    // Planted leaks are dropped (demo plan: every detector "drop"), unless an earlier stage got there first.
    const auto& rejects = DemoRejectsById();
    ASSERT_TRUE(rejects.count(id)) << id;
    std::string stage = rejects.at(id)["stage"];
    if (stage == "leakage") {
      EXPECT_EQ(rejects.at(id)["reason"].get<std::string>().rfind("eval_leak_", 0), 0u) << id;
    }
  }
  for (const auto& [id, j] : found) EXPECT_TRUE(planted.count(id)) << "flagged a clean record: " << id;
  EXPECT_EQ(found.size(), planted.size());
  const Json& sec = DemoSummary()["stages"]["leakage"];
  EXPECT_EQ(sec["contaminated_records"].get<size_t>(), planted.size());
  for (const auto& [id, j] : found) {
    for (const auto& m : j["matches"]) {
      // Spans stay short (at most 20 words).
      std::string span = m["span"];
      EXPECT_LE(std::count(span.begin(), span.end(), ' '), 19) << id;
    }
  }
}

std::string WriteTemp(const std::string& name, const std::string& text) {
  std::string path = ::testing::TempDir() + name;
  std::ofstream(path, std::ios::binary) << text;
  return path;
}

TEST(Leakage, AuditCommandOnHandMadeFiles) {
  auto pw = [](const std::string& id, const std::string& prompt, const std::string& thread) {
    return Json{{"id", id}, {"prompt", prompt}, {"chosen", "a"}, {"rejected", "b"}, {"thread", thread}}.dump() + "\n";
  };
  std::string q = "which flowers from the library would attract pollinators to a small terrace and when should each one be sown";
  std::string train = WriteTemp("e2e_audit_train.jsonl", pw("t1", q, "th-1") + pw("t2", "how do i water seedlings", "th-2"));
  std::string held = WriteTemp("e2e_audit_held.jsonl", pw("h1", "Q: " + q + "?", "th-7") + pw("h2", "where is the desk", "th-8"));
  std::string clean = WriteTemp("e2e_audit_clean.jsonl", pw("h3", "where is the desk", "th-9"));
  std::string out = ::testing::TempDir() + "e2e_audit_out";
  std::string bin = PREFSIFT_BINARY;
  std::string common = " --layout pairwise --field thread=/thread --overwrite -q -o " + out;
  EXPECT_EQ(Shell(bin + " audit --train " + train + " --heldout " + held + common + " --gate"), 4);
  auto lines = ReadJsonl(out + "/audit.jsonl");
  ASSERT_EQ(lines.size(), 1u);
  EXPECT_EQ(lines[0]["heldout_id"], "h1");
  EXPECT_EQ(lines[0]["listed"][0]["train_id"], "t1");
  EXPECT_EQ(Shell(bin + " audit --train " + train + " --heldout " + held + common), 0);  // no --gate
  EXPECT_EQ(Shell(bin + " audit --train " + train + " --heldout " + clean + common + " --gate"), 0);
  auto summary = Json::parse(ReadFile(out + "/audit.json"));
  EXPECT_FALSE(summary["leak_found"].get<bool>());
}

}  // namespace
}  // namespace prefsift::e2e
