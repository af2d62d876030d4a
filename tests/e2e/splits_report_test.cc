// End-to-end: splits, datasheet, report and gate on the demo
// (samples/demo-plan.json), a byte-identical rerun, and the report in headless
// Chromium (skipped when /usr/bin/chromium is absent).
#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include <filesystem>
#include <fstream>
#include <map>
#include <set>
#include <string>
#include <vector>

#include "e2e/e2e_helpers.h"

namespace prefsift::e2e {
namespace {

using Json = nlohmann::ordered_json;

TEST(SplitsReport, DemoWritesSplitsDatasheetReportAndGate) {
  const std::string& out = DemoOutput();
  for (const char* f : {"train.comparisons.jsonl", "valid.comparisons.jsonl", "test.comparisons.jsonl",
                        "datasheet.md", "datasheet.json", "report.html", "assignments.jsonl"}) {
    EXPECT_TRUE(std::filesystem::exists(out + "/" + f)) << f;
  }
  const Json& s = DemoSummary();
  ASSERT_TRUE(s.contains("gate"));
  // Each check's verdict follows from its value and threshold (docs/gate.md: thresholds inclusive; min_* passes
  // when value >= threshold, max_* when value <= threshold, require_split_checks when the checks passed).
  const Json& checks = s["gate"]["checks"];
  ASSERT_EQ(checks.size(), 8u);  // seven gate keys; max_leakage_rate once per evaluation set (two sets)
  std::vector<std::string> failed;
  for (const auto& c : checks) {
    const std::string key = c["check"];
    ASSERT_TRUE(c["value"].is_number()) << "not evaluated on the demo: " << c.dump();
    const double v = c["value"].get<double>();
    const double t = c["threshold"].is_boolean() ? 1.0 : c["threshold"].get<double>();
    const bool pass = key.rfind("min_", 0) == 0 ? v >= t : key.rfind("max_", 0) == 0 ? v <= t : v == 1.0;
    EXPECT_EQ(c["verdict"], pass ? "pass" : "fail") << c.dump();
    if (!pass) failed.push_back(key);
  }
  // The samples plant volunteers with a position bias (samples/truth.json "bias.position.biased_annotators"), so the
  // chosen-slot test must fail the demo's min_position_p_adjusted = 0.01 and nothing else (docs/gate.md, "Demo").
  ASSERT_FALSE(Truth()["bias"]["position"]["biased_annotators"].empty());
  // The planted length preference on the phone line must fail max_shortcut_lift (docs/gate.md, "Demo").
  EXPECT_EQ(failed, (std::vector<std::string>{"min_position_p_adjusted", "max_shortcut_lift"}));
  EXPECT_EQ(s["gate"]["verdict"], "fail");
  EXPECT_EQ(s["gate"]["failed"], 2);
  EXPECT_EQ(s["gate"]["passed"], 6);
  EXPECT_EQ(s["stages"]["split"]["checks"]["groups_spanning_splits"], 0);
  EXPECT_EQ(s["stages"]["split"]["checks"]["passed"], true);
  Json ds = Json::parse(ReadFile(out + "/datasheet.json"));
  ASSERT_EQ(ds["sections"].size(), 7u);  // Gebru et al. 2018/2021 [V]
  EXPECT_EQ(ds["gate"], s["gate"]);
}

// Every thread of comparisons.jsonl (samples/truth.json "groups.threads")
// lands in one split.
TEST(SplitsReport, DemoThreadsAreNeverSplitApart) {
  std::map<std::string, std::string> split_of;
  for (const auto& j : ReadJsonl(DemoOutput() + "/assignments.jsonl")) split_of[j["id"]] = j["split"];
  std::map<std::string, std::set<std::string>> by_thread;
  std::ifstream in(SourceDir() + "/samples/comparisons.jsonl");
  std::string line;
  while (std::getline(in, line)) {
    Json j = Json::parse(line, nullptr, false);  // the samples plant malformed lines
    if (!j.is_object() || !j.contains("uid") || !j.contains("thread") || !j["thread"].is_string()) continue;
    auto it = split_of.find(j["uid"]);
    if (it != split_of.end()) by_thread[j["thread"]].insert(it->second);
  }
  EXPECT_GT(by_thread.size(), 900u);  // truth: 1039 threads
  for (const auto& [t, splits] : by_thread) EXPECT_EQ(splits.size(), 1u) << t;
}

// A rerun with the same inputs, plan and SOURCE_DATE_EPOCH but another
// --threads value gives byte-identical files.
TEST(SplitsReport, RerunIsByteIdentical) {
  const std::string& first = DemoOutput();
  std::string second = first + "-rerun";
  std::string log;
  int rc = Shell(std::string("SOURCE_DATE_EPOCH=1775000000 ") + PREFSIFT_BINARY + " run -q --threads 1 --plan " +
                     SourceDir() + "/samples/demo-plan.json --out " + second + " --overwrite",
                 &log);
  // The demo's gate fails (see DemoWritesSplitsDatasheetReportAndGate): exit 4, outputs written (docs/gate.md).
  ASSERT_EQ(rc, 4) << log;
  size_t n = 0;
  for (const auto& e : std::filesystem::directory_iterator(first)) {
    std::string name = e.path().filename().string();
    EXPECT_TRUE(ReadFile(e.path().string()) == ReadFile(second + "/" + name)) << name << " differs";
    ++n;
  }
  size_t m = 0;
  for ([[maybe_unused]] const auto& e : std::filesystem::directory_iterator(second)) ++m;
  EXPECT_EQ(n, m);
  std::filesystem::remove_all(second);
}

// The report in a real browser: no console errors, every chart with data has
// data marks (the page's own self-check), and a screenshot for people.
TEST(SplitsReport, ReportRendersInHeadlessChromium) {
  if (!std::filesystem::exists("/usr/bin/chromium")) {
    GTEST_SKIP() << "/usr/bin/chromium is absent (scripts/install-deps.sh installs Debian's chromium)";
  }
  std::string profile = ::testing::TempDir() + "prefsift-chromium-" + std::to_string(::getpid());
  std::filesystem::remove_all(profile);
  std::filesystem::create_directories(profile);
  const std::string flags =
      " --headless --no-sandbox --disable-gpu --disable-quic --no-first-run --disable-background-networking"
      " --disable-component-update --disable-sync --user-data-dir=" + profile;
  const std::string url = "file://" + std::filesystem::absolute(DemoOutput() + "/report.html").string();
  std::string dom;
  int rc = Shell("timeout 90 /usr/bin/chromium" + flags + " --enable-logging=stderr --v=0 --dump-dom " + url, &dom);
  ASSERT_EQ(rc, 0) << dom.substr(0, 2000);
  // Console errors and uncaught exceptions are logged as CONSOLE lines.
  EXPECT_EQ(dom.find("Uncaught"), std::string::npos) << dom.substr(0, 2000);
  size_t pos = 0;
  while ((pos = dom.find(":CONSOLE(", pos)) != std::string::npos) {
    size_t line_start = dom.rfind('\n', pos);
    std::string line = dom.substr(line_start == std::string::npos ? 0 : line_start, pos - line_start + 80);
    EXPECT_EQ(line.find("ERROR"), std::string::npos) << line;
    ++pos;
  }
  EXPECT_NE(dom.find("data-verdict=\"ok\""), std::string::npos) << "the page's chart self-check did not pass";
  for (const char* chart : {"ledger", "splits", "chosen-slot", "lengths", "clusters", "personal-data", "leakage"}) {
    std::string tag = std::string("data-chart=\"") + chart + "\" data-state=\"data\" data-marks=\"";
    size_t at = dom.find(tag);
    ASSERT_NE(at, std::string::npos) << chart << " has no data";
    EXPECT_NE(dom[at + tag.size()], '0') << chart << " has no data marks";
  }
  std::string shot = ::testing::TempDir() + "prefsift-report.png";
  std::string log;
  rc = Shell("timeout 90 /usr/bin/chromium" + flags + " --window-size=1100,3900 --screenshot=" + shot + " " + url, &log);
  EXPECT_EQ(rc, 0) << log;
  EXPECT_TRUE(std::filesystem::exists(shot));
  std::printf("screenshot: %s\n", shot.c_str());
  std::filesystem::remove_all(profile);
}

}  // namespace
}  // namespace prefsift::e2e
