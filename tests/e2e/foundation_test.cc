// End-to-end: the demo pipeline on samples/, scored against samples/truth.json
// for the foundation's job: malformed lines, exact duplicates, label conflicts,
// degenerate comparisons, and the ledger.
#include <gtest/gtest.h>

#include <filesystem>
#include <map>
#include <set>

#include "e2e/e2e_helpers.h"

namespace prefsift::e2e {
namespace {

using Json = nlohmann::ordered_json;

std::string InputName(const std::string& file) { return std::filesystem::path(file).stem().string(); }

// Input order of the demo plan: the first record of a group in this order is the one kept.
int InputRank(const std::string& file) {
  static const std::map<std::string, int> kOrder = {{"comparisons", 0}, {"pairwise", 1}, {"ranked_chat", 2}};
  return kOrder.at(InputName(file));
}

std::string ExactReason(const std::string& id) {
  const auto& rejects = DemoRejectsById();
  auto it = rejects.find(id);
  if (it == rejects.end() || it->second["stage"] != "exact") return "";
  return it->second["reason"].get<std::string>();
}

const Json& FirstInInputOrder(const Json& records) {
  const Json* best = &records[0];
  for (const auto& r : records) {
    auto key = [](const Json& x) { return std::make_pair(InputRank(x["file"]), x["line"].get<int>()); };
    if (key(r) < key(*best)) best = &r;
  }
  return *best;
}

TEST(DemoFoundation, LedgerBalancesPerFile) {
  const Json& s = DemoSummary();
  EXPECT_TRUE(s["ledger"]["balanced"].get<bool>());
  uint64_t kept_lines = 0;
  for (auto& e : std::filesystem::directory_iterator(DemoOutput())) {
    std::string name = e.path().filename().string();
    if (name == "rejects.jsonl" || name.size() < 6 || name.substr(name.size() - 6) != ".jsonl") continue;
    if (name.rfind("train", 0) == 0 || name.rfind("valid", 0) == 0 || name.rfind("test", 0) == 0 ||
        name.rfind("kept", 0) == 0) {
      kept_lines += ReadJsonl(e.path().string()).size();
    }
  }
  uint64_t rejected_lines = ReadJsonl(DemoOutput() + "/rejects.jsonl").size();
  EXPECT_EQ(kept_lines, s["ledger"]["kept"].get<uint64_t>());
  EXPECT_EQ(rejected_lines, s["ledger"]["rejected"].get<uint64_t>());
  for (const auto& in : s["inputs"]) {
    const Json& counts = Truth()["counts"][in["name"].get<std::string>() + ".jsonl"];
    EXPECT_EQ(in["records_in"], counts["lines"]) << in["name"];
    EXPECT_EQ(in["kept"].get<uint64_t>() + in["rejected"].get<uint64_t>(), in["records_in"].get<uint64_t>());
  }
}

TEST(DemoFoundation, EveryMalformedLineRejectedAtIngestAndNoOther) {
  std::set<std::pair<std::string, int>> planted;
  for (const auto& m : Truth()["malformed"]) planted.insert({InputName(m["file"]), m["line"].get<int>()});
  std::set<std::pair<std::string, int>> found;
  for (const auto& j : ReadJsonl(DemoOutput() + "/rejects.jsonl")) {
    if (j["stage"] == "ingest") found.insert({j["input"].get<std::string>(), j["line"].get<int>()});
  }
  EXPECT_EQ(found, planted);
}

TEST(DemoFoundation, ExactDuplicatesConflictsAndDegenerateFoundWithNoFalseOnes) {
  std::set<std::string> expected_exact;  // every record the exact stage must reject
  size_t groups = 0, conflicts = 0, degenerate = 0;
  for (const auto& g : Truth()["exact_duplicates"]) {
    const Json& first = FirstInInputOrder(g["records"]);
    for (const auto& r : g["records"]) {
      std::string id = r["id"];
      if (id == first["id"]) {
        EXPECT_EQ(ExactReason(id), "") << "the first copy must be kept: " << id;
      } else {
        EXPECT_EQ(ExactReason(id), "duplicate_comparison") << id;
        expected_exact.insert(id);
      }
    }
    ++groups;
  }
  for (const auto& g : Truth()["label_conflicts"]) {
    bool has_majority = !g["majority"].is_null();
    Json agreeing = Json::array();
    for (const auto& r : g["records"]) {
      std::string id = r["id"];
      if (!has_majority) {
        EXPECT_EQ(ExactReason(id), "label_conflict_no_majority") << id;
        expected_exact.insert(id);
      } else if (!r["agrees_with_majority"].get<bool>()) {
        EXPECT_EQ(ExactReason(id), "label_conflict_minority") << id;
        expected_exact.insert(id);
      } else {
        agreeing.push_back(r);
      }
    }
    if (has_majority) {
      const Json& keep = FirstInInputOrder(agreeing);
      for (const auto& r : agreeing) {
        if (r["id"] == keep["id"]) {
          EXPECT_EQ(ExactReason(r["id"]), "") << r["id"];
        } else {
          EXPECT_EQ(ExactReason(r["id"]), "duplicate_comparison") << r["id"];
          expected_exact.insert(r["id"].get<std::string>());
        }
      }
    }
    ++conflicts;
  }
  for (const auto& d : Truth()["degenerate"]) {
    EXPECT_EQ(ExactReason(d["id"]), "degenerate_comparison") << d["id"];
    expected_exact.insert(d["id"].get<std::string>());
    ++degenerate;
  }
  // Comparisons of one prompt with different candidates are normal: kept.
  for (const auto& g : Truth()["same_prompt_different_candidates"]) {
    for (const auto& r : g["records"]) EXPECT_EQ(ExactReason(r["id"]), "") << r["id"];
  }
  std::set<std::string> rejected_exact;
  for (const auto& [id, j] : DemoRejectsById()) {
    if (j["stage"] == "exact") rejected_exact.insert(id);
  }
  EXPECT_EQ(rejected_exact, expected_exact) << "false or missed exact-stage rejects";
  std::cout << "exact stage on samples: " << groups << " duplicate groups, " << conflicts << " conflict groups, "
            << degenerate << " degenerate; " << rejected_exact.size() << " rejects, all planted\n";
}

TEST(DemoFoundation, RejectsNameFileLineReasonAndKeepTheRecord) {
  for (const auto& j : ReadJsonl(DemoOutput() + "/rejects.jsonl")) {
    EXPECT_TRUE(j.contains("file") && j.contains("line") && j.contains("reason") && j.contains("stage"));
    EXPECT_TRUE(j.contains("record") || j.contains("record_text") || j.contains("record_base64") ||
                j.contains("record_omitted"))
        << j.dump();
  }
}

// The provenance's digest of every input (taken while pass 2 reads it) and of
// every output (taken while it is written) against Python's hashlib
// (FIPS 180-4 SHA-256) over the files as they lie on disk, and their sizes
// against the file system's; the demo's gate fails on purpose (exit 4), so
// this also covers a run whose gate failed.
TEST(DemoFoundation, ProvenanceDigestsAreTheFilesOwn) {
  const Json ds = Json::parse(ReadFile(DemoOutput() + "/datasheet.json"));
  const std::string py = std::string(PREFSIFT_REF_PYTHON) +
                         " -c \"import hashlib,os,sys;p=sys.argv[1];"
                         "print(hashlib.sha256(open(p,'rb').read()).hexdigest(), os.path.getsize(p))\" ";
  ASSERT_FALSE(ds["provenance"]["inputs"].empty());
  for (const auto& in : ds["provenance"]["inputs"]) {
    std::string out;
    ASSERT_EQ(Shell(py + in["path"].get<std::string>(), &out), 0) << out;
    EXPECT_EQ(in["sha256"].get<std::string>() + " " + std::to_string(in["bytes"].get<uint64_t>()) + "\n", out)
        << in["path"];
  }
  ASSERT_GT(ds["provenance"]["outputs"].size(), 5u);
  for (const auto& o : ds["provenance"]["outputs"]) {
    std::string out;
    ASSERT_EQ(Shell(py + DemoOutput() + "/" + o["file"].get<std::string>(), &out), 0) << out;
    EXPECT_EQ(o["sha256"].get<std::string>() + " " + std::to_string(o["bytes"].get<uint64_t>()) + "\n", out)
        << o["file"];
  }
}


}  // namespace
}  // namespace prefsift::e2e
