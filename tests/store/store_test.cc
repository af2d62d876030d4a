// Growing stores (docs/store.md), end to end through the prefsift binary:
// batches vs one full run, crash safety at named kill points, a busy store,
// history, the cumulative summary and the whole-store datasheet and report,
// the group-conflict policies, shard signing + merge vs the near stage.
//
// Outside references: SHA-256 of the inputs recomputed with Python's hashlib
// (FIPS 180-4) [V]; the store file checked with SQLite's own
// PRAGMA integrity_check and read back with Python's sqlite3 module [V].
#include <gtest/gtest.h>
#include <nlohmann/json.hpp>
#include <sqlite3.h>

#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <set>
#include <sstream>
#include <regex>
#include <string>
#include <vector>

#include "store/history.h"

namespace prefsift::store {
namespace {

namespace fs = std::filesystem;
using Json = nlohmann::ordered_json;

struct Ran {
  int exit = -1;     // exit code, or -1 when killed
  int signal = 0;    // the signal that ended it
  std::string err;   // stderr
};

std::string Slurp(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

Ran RunBin(const std::string& args, const std::string& env = "") {
  // One stderr file per process: ctest runs the tests of this file in parallel processes.
  std::string err = ::testing::TempDir() + "store_test_stderr_" + std::to_string(::getpid()) + ".txt";
  std::string cmd = "env SOURCE_DATE_EPOCH=1767225600 " + env + " " + PREFSIFT_BIN + " " + args + " 2>" + err + " >/dev/null";
  int st = std::system(cmd.c_str());
  Ran r;
  if (WIFEXITED(st)) r.exit = WEXITSTATUS(st);
  if (WIFSIGNALED(st)) r.signal = WTERMSIG(st);
  // std::system runs a shell; a child killed by a signal shows as 128+n.
  if (r.exit > 128) {
    r.signal = r.exit - 128;
    r.exit = -1;
  }
  r.err = Slurp(err);
  return r;
}

std::string Capture(const std::string& cmd) {
  std::string out;
  FILE* p = popen(cmd.c_str(), "r");
  if (!p) return out;
  char buf[4096];
  size_t n;
  while ((n = fread(buf, 1, sizeof buf, p)) > 0) out.append(buf, n);
  pclose(p);
  return out;
}

// A fresh folder with the comparisons sample cut into three batches by line
// ranges (1-1000, 1001-2000, 2001-3000) and a plan with its layout.
class StoreTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = ::testing::TempDir() + "store_" + ::testing::UnitTest::GetInstance()->current_test_info()->name();
    fs::remove_all(dir_);
    fs::create_directories(dir_);
    std::ifstream in(std::string(PREFSIFT_SAMPLES) + "/comparisons.jsonl");
    std::string line;
    std::vector<std::string> lines;
    while (std::getline(in, line)) lines.push_back(line);
    ASSERT_EQ(lines.size(), 3000u);
    for (int b = 0; b < 3; ++b) {
      std::ofstream out(Part(b));
      for (int k = b * 1000; k < (b + 1) * 1000; ++k) out << lines[static_cast<size_t>(k)] << "\n";
    }
    Json plan = {
        {"inputs", Json::array({Json{{"path", "part1.jsonl"},
                                     {"layout", {{"id", "/uid"}, {"prompt", "/ask"}, {"candidates", "/replies"},
                                                 {"candidate_text", "/text"}, {"choice", "/pick"},
                                                 {"annotator", "/volunteer"}, {"thread", "/thread"},
                                                 {"source", "/channel"}}}}})},
        {"stages", {{"exact", {{"conflicts", "keep-majority"}}},
                    {"near", {{"threshold", 0.8}}},
                    {"screen", {{"action", "flag"}}},
                    {"split", {{"tie_by", {"prompt", "near", "thread"}}}}}},
        // No gate: the screen only flags here, which the default gate would fail
        // (docs/gate.md); these tests are about batches, not the gate.
        {"gate", Json::object()}};
    std::ofstream(dir_ + "/plan.json") << plan.dump(2);
    Json full = plan;
    full["inputs"] = Json::array();
    for (int b = 0; b < 3; ++b) {
      Json in = plan["inputs"][0];
      in["path"] = "part" + std::to_string(b + 1) + ".jsonl";
      full["inputs"].push_back(in);
    }
    std::ofstream(dir_ + "/full-plan.json") << full.dump(2);
  }
  std::string Part(int b) const { return dir_ + "/part" + std::to_string(b + 1) + ".jsonl"; }
  std::string Store() const { return dir_ + "/store.db"; }
  Ran Add(int b, const std::string& env = "", const std::string& extra = "") {
    return RunBin("add -q --threads 2 --store " + Store() + " --plan " + dir_ + "/plan.json --out " + dir_ + "/out" +
                   std::to_string(b + 1) + " " + Part(b) + " " + extra,
               env);
  }
  std::string Digest() {
    auto d = StoreContentDigest(Store());
    EXPECT_TRUE(d.ok()) << d.status().message();
    return d.ok() ? d.value() : "";
  }
  std::string dir_;
};

// id -> split name, from the kept files of an output folder.
std::map<std::string, std::string> KeptSplits(const std::string& out) {
  std::map<std::string, std::string> m;
  for (const char* split : {"train", "valid", "test"}) {
    std::ifstream in(out + "/" + split + ".jsonl");
    std::string line;
    while (std::getline(in, line)) {
      Json j = Json::parse(line, nullptr, false);
      if (j.is_object() && j.contains("uid") && j["uid"].is_string()) m[j["uid"].get<std::string>()] = split;
    }
  }
  return m;
}

std::map<std::string, Json> Rejects(const std::string& out) {
  std::map<std::string, Json> m;
  std::ifstream in(out + "/rejects.jsonl");
  std::string line;
  while (std::getline(in, line)) {
    if (line.empty()) continue;
    Json j = Json::parse(line, nullptr, false);
    if (j.is_object() && j["id"].is_string()) m[j["id"].get<std::string>()] = j;
  }
  return m;
}

std::string IntegrityCheck(const std::string& path) {
  sqlite3* db = nullptr;
  std::string out;
  if (sqlite3_open_v2(path.c_str(), &db, SQLITE_OPEN_READONLY, nullptr) == SQLITE_OK) {
    sqlite3_exec(
        db, "PRAGMA integrity_check",
        [](void* o, int, char** v, char**) {
          *static_cast<std::string*>(o) += v[0] ? v[0] : "";
          return 0;
        },
        &out, nullptr);
  }
  sqlite3_close(db);
  return out;
}

TEST_F(StoreTest, BatchesMatchOneFullRunExceptDocumentedRules) {
  for (int b = 0; b < 3; ++b) {
    Ran r = Add(b);
    ASSERT_EQ(r.exit, 0) << r.err;
  }
  Ran full = RunBin("run -q --threads 2 --plan " + dir_ + "/full-plan.json --out " + dir_ + "/full");
  ASSERT_EQ(full.exit, 0) << full.err;
  std::map<std::string, std::string> inc;
  std::map<std::string, Json> inc_rejects;
  std::map<std::string, int> batch_of;
  for (int b = 0; b < 3; ++b) {
    for (auto& [id, s] : KeptSplits(dir_ + "/out" + std::to_string(b + 1))) inc[id] = s;
    for (auto& [id, j] : Rejects(dir_ + "/out" + std::to_string(b + 1))) inc_rejects[id] = j;
  }
  for (int b = 0; b < 3; ++b) {
    std::ifstream in(Part(b));
    std::string line;
    while (std::getline(in, line)) {
      Json j = Json::parse(line, nullptr, false);  // the sample plants malformed lines
      if (j.is_object() && j.contains("uid") && j["uid"].is_string()) batch_of[j["uid"].get<std::string>()] = b;
    }
  }
  std::map<std::string, std::string> all = KeptSplits(dir_ + "/full");
  std::map<std::string, Json> full_rejects = Rejects(dir_ + "/full");
  // Full run groups (assignments.jsonl): which batches each group spans.
  std::map<std::string, std::string> group_of;
  std::map<std::string, std::set<int>> group_batches;
  {
    std::ifstream in(dir_ + "/full/assignments.jsonl");
    std::string line;
    while (std::getline(in, line)) {
      Json j = Json::parse(line);
      group_of[j["id"]] = j["group"];
      group_batches[j["group"]].insert(batch_of[j["id"]]);
    }
  }
  // Records in a label conflict in the full run or in any batch (conflicts.jsonl).
  std::set<std::string> in_conflict;
  for (std::string out : {std::string("/full"), std::string("/out1"), std::string("/out2"), std::string("/out3")}) {
    std::ifstream in(dir_ + out + "/conflicts.jsonl");
    std::string line;
    while (std::getline(in, line)) {
      Json j = Json::parse(line);
      for (const auto& m : j["members"]) in_conflict.insert(m["id"].get<std::string>());
    }
  }
  ASSERT_GT(all.size(), 2000u);
  // Kept sets: any difference is a record the documented store rules decide
  // differently: a label conflict across batches (the stored judgment stays)
  // or a record held back for tying stored groups in different splits.
  size_t differ = 0;
  std::set<std::string> ids;
  for (auto& [id, s] : all) ids.insert(id);
  for (auto& [id, s] : inc) ids.insert(id);
  for (const auto& id : ids) {
    bool a = all.count(id), b = inc.count(id);
    if (a == b) continue;
    ++differ;
    std::string inc_reason = inc_rejects.count(id) ? inc_rejects[id]["reason"].get<std::string>() : "";
    std::string full_reason = full_rejects.count(id) ? full_rejects[id]["reason"].get<std::string>() : "";
    bool explained = inc_reason == "store_label_conflict" || inc_reason == "store_group_conflict" ||
                     in_conflict.count(id);
    EXPECT_TRUE(explained) << id << " kept in " << (a ? "full" : "batches") << " only; batch reason " << inc_reason
                           << ", full reason " << full_reason;
  }
  // Splits: equal for every record kept in both, except in groups that span
  // batches (a stored group keeps its split; the full run keys the whole group).
  size_t same = 0, moved_spanning = 0;
  for (const auto& [id, s] : all) {
    if (!inc.count(id)) continue;
    if (inc[id] == s) {
      ++same;
      continue;
    }
    ASSERT_TRUE(group_of.count(id)) << id;
    EXPECT_GT(group_batches[group_of[id]].size(), 1u) << id << " moved split in a group inside one batch";
    ++moved_spanning;
  }
  std::printf("[store] kept full %zu, batches %zu, differ %zu; same split %zu, moved (groups spanning batches) %zu\n",
              all.size(), inc.size(), differ, same, moved_spanning);
  EXPECT_LT(differ, all.size() / 50);
  EXPECT_GT(same, all.size() * 9 / 10);
  // Within each batch, records were checked against the store: no kept
  // record of a later batch repeats a stored comparison (store_duplicate rejects exist).
  size_t store_dups = 0;
  for (auto& [id, j] : inc_rejects) store_dups += j["reason"] == "store_duplicate";
  EXPECT_GT(store_dups, 0u);
}

TEST_F(StoreTest, HistorySummaryAndDigestsAgreeWithPython) {
  ASSERT_EQ(Add(0).exit, 0);
  ASSERT_EQ(Add(1).exit, 0);
  std::string hist = Capture(std::string(PREFSIFT_BIN) + " history --store " + Store());
  EXPECT_NE(hist.find("    1  2026-01-01T00:00:00Z"), std::string::npos) << hist;  // SOURCE_DATE_EPOCH honoured
  EXPECT_NE(hist.find("    2  "), std::string::npos) << hist;
  Json sum = Json::parse(Capture(std::string(PREFSIFT_BIN) + " store-summary --store " + Store()));
  ASSERT_EQ(sum["batches"].size(), 2u);
  // Input digests against Python's hashlib (FIPS 180-4 SHA-256) [V].
  for (int b = 0; b < 2; ++b) {
    std::string py = Capture(std::string(PREFSIFT_REF_PYTHON) +
                             " -c \"import hashlib,sys;print(hashlib.sha256(open(sys.argv[1],'rb').read()).hexdigest())\" " +
                             Part(b));
    EXPECT_EQ(sum["batches"][b]["inputs"][0]["sha256"].get<std::string>() + "\n", py);
  }
  // Kept per split, read independently with Python's sqlite3 module [V],
  // equals the kept lines the two batches wrote.
  std::string py = Capture(std::string(PREFSIFT_REF_PYTHON) +
                           " -c \"import sqlite3,sys;c=sqlite3.connect(sys.argv[1]);"
                           "print(' '.join('%s=%d'%r for r in c.execute('SELECT split,COUNT(*) FROM records WHERE kept=1 GROUP BY split ORDER BY split')))\" " +
                           Store());
  std::map<std::string, int> counts;
  for (int b = 0; b < 2; ++b) {
    for (auto& [id, s] : KeptSplits(dir_ + "/out" + std::to_string(b + 1))) ++counts[s];
  }
  std::string expect;
  for (auto& [s, n] : counts) expect += (expect.empty() ? "" : " ") + s + "=" + std::to_string(n);
  EXPECT_EQ(py, expect + "\n");
  uint64_t kept = 0;
  for (const auto& s : sum["splits"]) kept += s["records"].get<uint64_t>();
  EXPECT_EQ(kept, sum["totals"]["kept"].get<uint64_t>());
  EXPECT_EQ(IntegrityCheck(Store()), "ok");
  // Per batch annotator agreement (docs/annotators.md): the batch row holds the
  // same alpha and interval as that batch's own summary.json.
  for (int b = 0; b < 2; ++b) {
    Json own = Json::parse(Slurp(dir_ + "/out" + std::to_string(b + 1) + "/summary.json"))["stages"]["annotators"]["agreement"];
    const Json& row = sum["batches"][b]["counts"]["annotator_agreement"];
    EXPECT_EQ(row["alpha"], own["alpha"]) << "batch " << b + 1;
    EXPECT_EQ(row["interval"], own["interval"]) << "batch " << b + 1;
  }
}

TEST_F(StoreTest, SameBatchTwiceIsANoOpAndOtherSettingsAreRefused) {
  ASSERT_EQ(Add(0).exit, 0);
  std::string before = Digest();
  Ran again = Add(0, "", "--overwrite");
  EXPECT_EQ(again.exit, 0) << again.err;
  EXPECT_NE(again.err.find("already added as batch 1"), std::string::npos) << again.err;
  EXPECT_EQ(Digest(), before);
  // A plan with another near threshold: refused, store untouched.
  std::string p = Slurp(dir_ + "/plan.json");
  p.replace(p.find("0.8"), 3, "0.7");
  std::ofstream(dir_ + "/plan.json") << p;
  Ran other = Add(1);
  EXPECT_EQ(other.exit, 2) << other.err;
  EXPECT_NE(other.err.find("a store keeps one configuration"), std::string::npos) << other.err;
  EXPECT_EQ(Digest(), before);
}

// SIGKILL at each named point of a batch: the store is exactly as before or
// exactly as after it, and a rerun of the batch succeeds.
TEST_F(StoreTest, KilledBatchLeavesStoreBeforeOrAfter) {
  // The "after" state: a clean second batch on a copy.
  ASSERT_EQ(Add(0).exit, 0);
  fs::copy_file(Store(), dir_ + "/store0.db");
  std::string before = Digest();
  ASSERT_EQ(Add(1).exit, 0);
  std::string after = Digest();
  ASSERT_NE(before, after);
  for (const char* phase : {"after-begin", "mid-write", "before-commit", "after-commit"}) {
    SCOPED_TRACE(phase);
    fs::remove(Store());
    fs::remove(Store() + "-wal");
    fs::remove(Store() + "-shm");
    fs::copy_file(dir_ + "/store0.db", Store());
    fs::remove_all(dir_ + "/out2");
    Ran killed = Add(1, std::string("PREFSIFT_TEST_KILL_AT=") + phase);
    EXPECT_EQ(killed.signal, 9) << "exit " << killed.exit << ": " << killed.err;
    EXPECT_EQ(IntegrityCheck(Store()), "ok");
    std::string now = Digest();
    bool after_phase = std::string(phase) == "after-commit";
    EXPECT_EQ(now, after_phase ? after : before);
    Ran rerun = Add(1, "", "--overwrite");
    EXPECT_EQ(rerun.exit, 0) << rerun.err;
    EXPECT_EQ(Digest(), after);
  }
}

TEST_F(StoreTest, SecondWriterWaitsThenFailsClearly) {
  ASSERT_EQ(Add(0).exit, 0);
  std::string before = Digest();
  sqlite3* db = nullptr;
  ASSERT_EQ(sqlite3_open(Store().c_str(), &db), SQLITE_OK);
  ASSERT_EQ(sqlite3_exec(db, "BEGIN IMMEDIATE", nullptr, nullptr, nullptr), SQLITE_OK);
  Ran busy = Add(1, "", "--wait 0.3");
  EXPECT_EQ(busy.exit, 3) << busy.err;
  EXPECT_NE(busy.err.find(Store()), std::string::npos) << busy.err;
  EXPECT_NE(busy.err.find("busy"), std::string::npos) << busy.err;
  sqlite3_exec(db, "ROLLBACK", nullptr, nullptr, nullptr);
  sqlite3_close(db);
  EXPECT_FALSE(fs::exists(dir_ + "/out2"));
  EXPECT_EQ(Digest(), before);
  Ran ok = Add(1);
  EXPECT_EQ(ok.exit, 0) << ok.err;
}

// store-report over three batches: the cumulative datasheet's totals are the
// sums of the batches' own summaries, no planted personal value appears, and
// a rerun writes byte-identical files. The sums are recomputed here from each
// batch's summary.json and kept files (plain arithmetic, no outside reference).
TEST_F(StoreTest, StoreReportSumsTheBatchesAndIsDeterministic) {
  for (int b = 0; b < 3; ++b) ASSERT_EQ(Add(b).exit, 0);
  Ran r = RunBin("store-report --store " + Store() + " --out " + dir_ + "/report");
  ASSERT_EQ(r.exit, 0) << r.err;
  for (const char* f : {"store-summary.json", "datasheet.md", "datasheet.json", "report.html"}) {
    EXPECT_TRUE(fs::exists(dir_ + "/report/" + f)) << f;
  }
  // Sums over the batches' own summary.json.
  uint64_t in = 0, kept = 0, rejected = 0;
  std::map<std::string, uint64_t> by_reason, by_split;
  for (int b = 0; b < 3; ++b) {
    std::string out = dir_ + "/out" + std::to_string(b + 1);
    Json s = Json::parse(Slurp(out + "/summary.json"));
    in += s["ledger"]["records_in"].get<uint64_t>();
    kept += s["ledger"]["kept"].get<uint64_t>();
    rejected += s["ledger"]["rejected"].get<uint64_t>();
    for (const auto& st : s["rejects_by_stage"]) {
      for (auto it = st["by_reason"].begin(); it != st["by_reason"].end(); ++it) {
        by_reason[st["stage"].get<std::string>() + "/" + it.key()] += it.value().get<uint64_t>();
      }
    }
    for (auto& [id, split] : KeptSplits(out)) ++by_split[split];
  }
  EXPECT_EQ(in, 3000u);
  EXPECT_EQ(kept + rejected, in);
  Json sheet = Json::parse(Slurp(dir_ + "/report/datasheet.json"));
  std::map<std::string, Json> facts;
  for (const auto& sec : sheet["sections"]) {
    if (sec["key"] == "composition") {
      for (const auto& f : sec["from_the_run"]) facts[f["fact"].get<std::string>()] = f["value"];
    }
  }
  EXPECT_EQ(facts["records read (non-blank input lines)"], in);
  EXPECT_EQ(facts["records kept"], kept);
  EXPECT_EQ(facts["records rejected"], rejected);
  EXPECT_EQ(facts["batches in the store"], 3);
  Json rec = facts["recommended splits (records; group-aware, see Preprocessing)"];
  for (auto& [split, n] : by_split) EXPECT_EQ(rec[split], n) << split;
  Json cum = Json::parse(Slurp(dir_ + "/report/store-summary.json"));
  std::map<std::string, uint64_t> cum_reasons;
  for (auto it = cum["totals"]["rejected_by_reason"].begin(); it != cum["totals"]["rejected_by_reason"].end(); ++it) {
    cum_reasons[it.key()] = it.value().get<uint64_t>();
  }
  EXPECT_EQ(cum_reasons, by_reason);
  EXPECT_GT(cum_reasons["store/store_duplicate"], 0u);
  // The preprocessing table lists the store's own rejects by reason.
  std::string md = Slurp(dir_ + "/report/datasheet.md");
  std::string html = Slurp(dir_ + "/report/report.html");
  EXPECT_NE(md.find("store_duplicate"), std::string::npos);
  EXPECT_NE(html.find("store_duplicate"), std::string::npos);
  // Every batch with its input digest, in both documents.
  for (const auto& b : cum["batches"]) {
    std::string sha = b["inputs"][0]["sha256"].get<std::string>();
    EXPECT_NE(md.find(sha), std::string::npos) << sha;
    EXPECT_NE(html.find(sha), std::string::npos) << sha;
  }
  EXPECT_NE(md.find(cum["content_sha256"].get<std::string>()), std::string::npos);
  // The caution (an aid, not a guarantee) in both.
  EXPECT_NE(md.find("an aid, not a guarantee"), std::string::npos);
  EXPECT_NE(html.find("an aid, not a guarantee"), std::string::npos);
  // No planted personal value (samples/truth.json) in any written file.
  Json truth = Json::parse(Slurp(std::string(PREFSIFT_SAMPLES) + "/truth.json"));
  size_t checked = 0;
  for (const auto& p : truth["personal_data"]["planted"]) {
    std::string v = p["value"].get<std::string>();
    for (const char* f : {"store-summary.json", "datasheet.md", "datasheet.json", "report.html"}) {
      EXPECT_EQ(Slurp(dir_ + "/report/" + f).find(v), std::string::npos) << f << " holds " << p["kind"];
    }
    ++checked;
  }
  EXPECT_GT(checked, 10u);
  // SOURCE_DATE_EPOCH (set by RunBin) is the only time; a rerun is byte-identical.
  EXPECT_NE(md.find("2026-01-01T00:00:00Z"), std::string::npos);
  ASSERT_EQ(RunBin("store-report --store " + Store() + " --out " + dir_ + "/report2").exit, 0);
  for (const char* f : {"store-summary.json", "datasheet.md", "datasheet.json", "report.html"}) {
    EXPECT_EQ(Slurp(dir_ + "/report/" + f), Slurp(dir_ + "/report2/" + f)) << f;
  }
  // Without SOURCE_DATE_EPOCH the wall-clock time of writing is recorded
  // (docs/datasheet.md); everything but that time still agrees.
  std::string bare = "env -u SOURCE_DATE_EPOCH " + std::string(PREFSIFT_BIN) + " store-report --overwrite --store " +
                     Store() + " --out ";
  ASSERT_EQ(std::system((bare + dir_ + "/report3 2>/dev/null").c_str()), 0);
  ASSERT_EQ(std::system((bare + dir_ + "/report4 2>/dev/null").c_str()), 0);
  EXPECT_NE(Slurp(dir_ + "/report3/datasheet.md").find("(wall clock; set SOURCE_DATE_EPOCH"), std::string::npos);
  auto without_time = [](std::string text) {
    static const std::regex t("\\d{4}-\\d\\d-\\d\\dT\\d\\d:\\d\\d:\\d\\dZ");
    return std::regex_replace(text, t, "T");
  };
  for (const char* f : {"datasheet.md", "datasheet.json", "report.html"}) {
    EXPECT_EQ(without_time(Slurp(dir_ + "/report3/" + f)), without_time(Slurp(dir_ + "/report4/" + f))) << f;
  }
  // An existing folder is refused without --overwrite.
  Ran again = RunBin("store-report --store " + Store() + " --out " + dir_ + "/report");
  EXPECT_NE(again.exit, 0);
}

// The store report's own chart self-check in a real browser (as
// tests/e2e/splits_report_test.cc); reported as skipped without Chromium.
TEST_F(StoreTest, StoreReportRendersInHeadlessChromium) {
  if (!fs::exists("/usr/bin/chromium")) {
    GTEST_SKIP() << "/usr/bin/chromium is absent (scripts/install-deps.sh installs Debian's chromium)";
  }
  for (int b = 0; b < 3; ++b) ASSERT_EQ(Add(b).exit, 0);
  Ran r = RunBin("store-report --store " + Store() + " --out " + dir_ + "/report");
  ASSERT_EQ(r.exit, 0) << r.err;
  std::string profile = dir_ + "/chromium-profile";
  // Chromium now and then gives no output on a loaded machine: one retry.
  std::string dom;
  for (int attempt = 0; attempt < 2 && dom.find("</html>") == std::string::npos; ++attempt) {
    dom = Capture("timeout 90 /usr/bin/chromium --headless --no-sandbox --disable-gpu --disable-quic "
                  "--no-first-run --disable-background-networking --disable-component-update "
                  "--disable-sync --user-data-dir=" + profile + " --dump-dom file://" + dir_ +
                  "/report/report.html 2>/dev/null");
  }
  EXPECT_NE(dom.find("data-verdict=\"ok\""), std::string::npos) << dom.substr(0, 2000);
  for (const char* chart : {"ledger", "splits", "clusters"}) {
    EXPECT_NE(dom.find(std::string("data-chart=\"") + chart + "\" data-state=\"data\" data-marks=\""), std::string::npos)
        << chart;
  }
}

// The plan's store.group_conflicts: "join-first" keeps the records that
// "reject" holds back, in the split of the group accepted first; nothing
// stored moves, and store_conflicts.jsonl and the summary list them.
TEST_F(StoreTest, JoinFirstPolicyKeepsConflictsInTheFirstGroup) {
  // Reject (the default) on a copy of the first batch, for comparison.
  ASSERT_EQ(Add(0).exit, 0);
  auto batch1 = [&](const std::string& store) {
    std::map<std::string, std::string> m;  // id -> split of batch-1 records
    sqlite3* db = nullptr;
    EXPECT_EQ(sqlite3_open_v2(store.c_str(), &db, SQLITE_OPEN_READONLY, nullptr), SQLITE_OK);
    sqlite3_stmt* q = nullptr;
    sqlite3_prepare_v2(db, "SELECT id, COALESCE(split, '') FROM records WHERE batch = 1", -1, &q, nullptr);
    while (sqlite3_step(q) == SQLITE_ROW) {
      m[reinterpret_cast<const char*>(sqlite3_column_text(q, 0))] = reinterpret_cast<const char*>(sqlite3_column_text(q, 1));
    }
    sqlite3_finalize(q);
    sqlite3_close(db);
    return m;
  };
  const auto before = batch1(Store());
  fs::copy_file(Store(), dir_ + "/join.db");
  ASSERT_EQ(Add(1).exit, 0);
  auto rejected = Rejects(dir_ + "/out2");
  std::set<std::string> held;
  for (auto& [id, j] : rejected) {
    if (j["reason"] == "store_group_conflict") held.insert(id);
  }
  ASSERT_FALSE(held.empty()) << "the samples cut at line 1000 should give a group conflict";
  // join-first on the copy.
  Json plan = Json::parse(Slurp(dir_ + "/plan.json"));
  plan["store"] = Json{{"path", "join.db"}, {"group_conflicts", "join-first"}};
  std::ofstream(dir_ + "/join-plan.json") << plan.dump(2);
  Ran j = RunBin("add -q --threads 2 --plan " + dir_ + "/join-plan.json --out " + dir_ + "/join2 " + Part(1));
  ASSERT_EQ(j.exit, 0) << j.err;
  auto kept = KeptSplits(dir_ + "/join2");
  auto reject_kept = KeptSplits(dir_ + "/out2");
  for (const auto& id : held) EXPECT_TRUE(kept.count(id)) << id << " should be kept by join-first";
  EXPECT_EQ(kept.size(), reject_kept.size() + held.size());
  // Each conflict names its resolution: the records sit in the chosen group's split.
  std::ifstream in(dir_ + "/join2/store_conflicts.jsonl");
  std::string line;
  size_t listed = 0;
  while (std::getline(in, line)) {
    Json c = Json::parse(line);
    ASSERT_EQ(c["resolution"]["policy"], "join-first") << line;
    if (!c["resolution"].contains("split")) continue;  // a near-cluster entry; its records are settled by ties
    bool named = false;
    for (const auto& g : c["groups"]) named = named || (g["group"] == c["resolution"]["group"] && g["split"] == c["resolution"]["split"]);
    EXPECT_TRUE(named) << line;
    for (const auto& id : c["records"]) {
      EXPECT_EQ(kept[id.get<std::string>()], c["resolution"]["split"].get<std::string>()) << id;
      ++listed;
    }
  }
  EXPECT_GE(listed, held.size());
  Json sum = Json::parse(Slurp(dir_ + "/join2/summary.json"));
  const Json* gc = nullptr;
  for (const auto* sec : {&sum["store"], &sum["stages"]["store"]}) {
    if (sec->is_object() && sec->contains("group_conflicts")) gc = &(*sec)["group_conflicts"];
  }
  ASSERT_NE(gc, nullptr) << sum.dump().substr(0, 400);
  EXPECT_EQ((*gc)["policy"], "join-first");
  EXPECT_EQ((*gc)["records_rejected"], 0);
  EXPECT_GE((*gc)["records_joined_first"].get<size_t>(), held.size());
  // Nothing stored moved: every batch-1 record keeps its split.
  EXPECT_EQ(batch1(dir_ + "/join.db"), before);
  EXPECT_EQ(IntegrityCheck(dir_ + "/join.db"), "ok");
  // The cumulative summary counts the joined records.
  Json cum = Json::parse(Capture(std::string(PREFSIFT_BIN) + " store-summary --store " + dir_ + "/join.db"));
  EXPECT_EQ(cum["totals"]["store"]["records_joined_first"], (*gc)["records_joined_first"]);
  EXPECT_EQ(cum["totals"]["store"]["store_group_conflicts"], 0);
  EXPECT_EQ(cum["batches"][1]["counts"]["group_conflict_policy"], "join-first");
}

TEST_F(StoreTest, StoreSettingsInThePlanAreChecked) {
  Json plan = Json::parse(Slurp(dir_ + "/plan.json"));
  plan["store"] = Json{{"path", "s.db"}, {"group_conflicts", "move-stored"}};
  std::ofstream(dir_ + "/bad.json") << plan.dump(2);
  Ran r = RunBin("add -q --plan " + dir_ + "/bad.json --out " + dir_ + "/o " + Part(0));
  EXPECT_EQ(r.exit, 2) << r.err;
  EXPECT_NE(r.err.find("store.group_conflicts"), std::string::npos) << r.err;
  EXPECT_NE(r.err.find("join-first"), std::string::npos) << r.err;
  plan["store"] = Json{{"path", "s.db"}, {"policy", "reject"}};
  std::ofstream(dir_ + "/bad.json") << plan.dump(2);
  r = RunBin("add -q --plan " + dir_ + "/bad.json --out " + dir_ + "/o " + Part(0));
  EXPECT_EQ(r.exit, 2) << r.err;
  EXPECT_NE(r.err.find("store.policy: unknown key"), std::string::npos) << r.err;
  EXPECT_FALSE(fs::exists(dir_ + "/s.db"));
  EXPECT_FALSE(fs::exists(dir_ + "/o"));
}

// A batch observed in parts and added through `decide --store` (issue 20,
// item 5) changes the store exactly as `add` of the whole batch does, and the
// parts' outputs, concatenated in part order, are `add`'s. Three parts of the
// second batch, the middle one empty; stored groups keep their splits.
TEST_F(StoreTest, BatchInPartsAddsAsTheWholeBatch) {
  ASSERT_EQ(Add(0).exit, 0);
  fs::copy_file(Store(), dir_ + "/parts.db");
  Json plan = Json::parse(Slurp(dir_ + "/plan.json"));
  plan["inputs"][0]["path"] = "part2.jsonl";
  std::ofstream(dir_ + "/plan2.json") << plan.dump(2);
  const std::string plan2 = " --plan " + dir_ + "/plan2.json";
  Ran whole = RunBin("add -q --threads 2 --store " + Store() + plan2 + " --out " + dir_ + "/whole");
  ASSERT_EQ(whole.exit, 0) << whole.err;

  // Parts: lines 1-400, nothing, lines 401-1000.
  const std::string text = Slurp(Part(1));
  size_t cut = 0;
  for (int k = 0; k < 400; ++k) cut = text.find('\n', cut) + 1;
  Json parts = {{"format", "prefsift-parts"}, {"version", 1}, {"parts", Json::array()}};
  const Json ranges[3][3] = {{0, cut, 1}, {cut, cut, 401}, {cut, nullptr, 401}};
  for (int k = 0; k < 3; ++k) {
    parts["parts"].push_back(Json{{"part", k}, {"input", 0}, {"path", dir_ + "/part2.jsonl"}, {"begin", ranges[k][0]},
                                  {"end", ranges[k][1]}, {"first_line", ranges[k][2]}});
  }
  std::ofstream(dir_ + "/parts.json") << parts.dump(2);
  std::string states;
  for (int k = 0; k < 3; ++k) {
    const std::string state = dir_ + "/part-" + std::to_string(k) + ".state";
    Ran o = RunBin("observe -q" + plan2 + " --parts " + dir_ + "/parts.json --part " + std::to_string(k) + " --out " +
                   state);
    ASSERT_EQ(o.exit, 0) << o.err;
    states += " " + state;
  }
  const std::string decide = "decide -q" + plan2 + " --store " + dir_ + "/parts.db --state" + states + " --out ";
  Ran d = RunBin(decide + dir_ + "/decided");
  ASSERT_EQ(d.exit, 0) << d.err;
  std::string joined_rejects, joined_splits[3];
  const char* splits[3] = {"train", "valid", "test"};
  for (int k = 0; k < 3; ++k) {
    const std::string out = dir_ + "/applied" + std::to_string(k);
    Ran a = RunBin("apply -q" + plan2 + " --parts " + dir_ + "/parts.json --part " + std::to_string(k) +
                   " --decisions " + dir_ + "/decided/part-" + std::to_string(k) + ".decisions --out " + out);
    ASSERT_EQ(a.exit, 0) << a.err;
    joined_rejects += Slurp(out + "/rejects.jsonl");
    for (int s = 0; s < 3; ++s) joined_splits[s] += Slurp(out + "/" + splits[s] + ".jsonl");
  }

  // The store: the same content digest (SOURCE_DATE_EPOCH fixes the batch time).
  auto a = StoreContentDigest(Store()), b = StoreContentDigest(dir_ + "/parts.db");
  ASSERT_TRUE(a.ok() && b.ok());
  EXPECT_EQ(a.value(), b.value());
  EXPECT_EQ(IntegrityCheck(dir_ + "/parts.db"), "ok");
  // The outputs: split files and rejects concatenated in part order, the
  // store's conflicts file, and the summary's store section.
  EXPECT_EQ(joined_rejects, Slurp(dir_ + "/whole/rejects.jsonl"));
  size_t kept = 0;
  for (int s = 0; s < 3; ++s) {
    EXPECT_EQ(joined_splits[s], Slurp(dir_ + "/whole/" + splits[s] + ".jsonl")) << splits[s];
    kept += std::count(joined_splits[s].begin(), joined_splits[s].end(), '\n');
  }
  EXPECT_GT(kept, 800u);
  EXPECT_EQ(Slurp(dir_ + "/decided/store_conflicts.jsonl"), Slurp(dir_ + "/whole/store_conflicts.jsonl"));
  Json sw = Json::parse(Slurp(dir_ + "/whole/summary.json")), sp = Json::parse(Slurp(dir_ + "/decided/summary.json"));
  sp["stages"]["store"].erase("store");  // the two stores' paths
  sw["stages"]["store"].erase("store");
  EXPECT_EQ(sp["stages"]["store"], sw["stages"]["store"]);
  EXPECT_GT(sw["stages"]["store"]["groups"]["records_inheriting_a_split"].get<int>(), 0);
  EXPECT_GT(sw["stages"]["store"]["exact"]["store_duplicates"].get<int>(), 0);
  EXPECT_EQ(sp["examples"], sw["examples"]);
  EXPECT_EQ(sp["gate"], sw["gate"]);

  // The same parts again: already added, nothing changes.
  Ran again = RunBin(decide + dir_ + "/decided-again");
  EXPECT_EQ(again.exit, 0) << again.err;
  EXPECT_NE(again.err.find("already added as batch 2"), std::string::npos) << again.err;
  auto c = StoreContentDigest(dir_ + "/parts.db");
  ASSERT_TRUE(c.ok());
  EXPECT_EQ(c.value(), b.value());
}

// shard-sign over the three parts + merge gives the near stage's clusters over
// their union (same banding and verification).
TEST_F(StoreTest, ShardSignAndMergeEqualTheNearStage) {
  std::string files;
  for (int b = 0; b < 3; ++b) {
    std::string out = dir_ + "/sig" + std::to_string(b + 1);
    Ran r = RunBin("shard-sign -q --plan " + dir_ + "/plan.json --out " + out + " " + Part(b));
    ASSERT_EQ(r.exit, 0) << r.err;
    files += " " + out + "/signatures.jsonl";
  }
  // The second shard compressed: merge reads through the shared line reader
  // (gzip recognised by its magic bytes, RFC 1952).
  ASSERT_EQ(std::system(("gzip -k " + dir_ + "/sig2/signatures.jsonl").c_str()), 0);
  files.replace(files.find("/sig2/signatures.jsonl"), 22, "/sig2/signatures.jsonl.gz");
  Ran m = RunBin("merge" + files + " --out " + dir_ + "/merged");
  ASSERT_EQ(m.exit, 0) << m.err;
  // A damaged line: the error names the file and the line.
  {
    std::string text = Slurp(dir_ + "/sig3/signatures.jsonl");
    size_t second = text.find('\n', text.find('\n') + 1);
    std::ofstream(dir_ + "/bad.jsonl") << text.substr(0, second + 1) << "{\"id\": \"x\", \"signature\": \"zz\"}\n";
    Ran bad = RunBin("merge " + dir_ + "/bad.jsonl --out " + dir_ + "/bad-merge");
    EXPECT_EQ(bad.exit, 3) << bad.err;
    EXPECT_NE(bad.err.find(dir_ + "/bad.jsonl:3: not a signature line"), std::string::npos) << bad.err;
  }
  Ran n = RunBin("near -q --plan " + dir_ + "/full-plan.json --out " + dir_ + "/near");
  ASSERT_EQ(n.exit, 0) << n.err;
  auto members = [](const std::string& path) {
    std::set<std::vector<std::string>> out;
    std::ifstream in(path);
    std::string line;
    while (std::getline(in, line)) {
      if (line.empty()) continue;
      out.insert(Json::parse(line)["members"].get<std::vector<std::string>>());
    }
    return out;
  };
  auto a = members(dir_ + "/merged/clusters.jsonl"), b = members(dir_ + "/near/clusters.jsonl");
  EXPECT_GT(a.size(), 10u);
  EXPECT_EQ(a, b);
}

}  // namespace
}  // namespace prefsift::store
