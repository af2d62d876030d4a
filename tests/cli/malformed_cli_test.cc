// The prefsift binary on malformed inputs and bad limits: exit codes
// (0 ok, 2 usage, 3 input, 5 --strict with rejects; docs/cli.md), messages
// that name the file or the flag, and the limit flags (docs/hardening.md).
#include <gtest/gtest.h>
#include <nlohmann/json.hpp>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>

namespace {

using Json = nlohmann::ordered_json;

struct CliRun {
  int code;
  std::string err;
};

// Per-process names: ctest runs tests in parallel processes that share TempDir().
std::string Tmp(const std::string& name) {
  return ::testing::TempDir() + "cli_" + std::to_string(::getpid()) + "_" + name;
}

std::string Slurp(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

// Runs `prefsift ARGS` with stderr captured; stdout discarded.
CliRun Prefsift(const std::string& args) {
  std::string err = Tmp("stderr.txt");
  std::string cmd = std::string(PREFSIFT_BINARY) + " " + args + " >/dev/null 2>" + err;
  int st = std::system(cmd.c_str());
  return {WIFEXITED(st) ? WEXITSTATUS(st) : -1, Slurp(err)};
}

std::string Corpus(const std::string& f) { return std::string(PREFSIFT_SOURCE_DIR) + "/tests/data/malformed/" + f; }

TEST(Cli, DirectoryGivenAsInputIsAnInputError) {
  std::string dir = Tmp("dir_input.jsonl");
  std::filesystem::create_directories(dir);
  CliRun r = Prefsift("check " + dir + " --layout choice -q --overwrite -o " + Tmp("o1"));
  EXPECT_EQ(r.code, 3) << r.err;
  EXPECT_NE(r.err.find(dir), std::string::npos) << r.err;
  EXPECT_NE(r.err.find("directory"), std::string::npos) << r.err;
  EXPECT_FALSE(std::filesystem::exists(Tmp("o1")));
}

TEST(Cli, MissingInputIsAnInputError) {
  CliRun r = Prefsift("check /nonexistent/x.jsonl --layout choice -q -o " + Tmp("o2"));
  EXPECT_EQ(r.code, 3) << r.err;
  EXPECT_NE(r.err.find("/nonexistent/x.jsonl"), std::string::npos) << r.err;
}

TEST(Cli, UnreadableInputIsAnInputError) {
  std::string f = Tmp("unreadable.jsonl");
  std::ofstream(f) << R"({"id":"a","prompt":"p","candidates":["a","b"],"choice":0})" "\n";
  ::chmod(f.c_str(), 0);
  if (::access(f.c_str(), R_OK) == 0) {
    ::chmod(f.c_str(), 0644);
    GTEST_SKIP() << "running as root: chmod 000 does not stop reads; "
                    "tests/stages/malformed_corpus_test.cc covers this with a fault-injecting FileSystem";
  }
  CliRun r = Prefsift("check " + f + " --layout choice -q --overwrite -o " + Tmp("o3"));
  ::chmod(f.c_str(), 0644);
  EXPECT_EQ(r.code, 3) << r.err;
  EXPECT_NE(r.err.find(f), std::string::npos) << r.err;
}

TEST(Cli, UsageErrors) {
  EXPECT_EQ(Prefsift("check --no-such-flag").code, 2);
  CliRun deep = Prefsift("check " + Corpus("crlf.jsonl") + " --layout choice -q -o " + Tmp("o4") + " --max-depth 5000");
  EXPECT_EQ(deep.code, 2);
  EXPECT_NE(deep.err.find("--max-depth"), std::string::npos) << deep.err;
  CliRun few = Prefsift("check " + Corpus("crlf.jsonl") + " --layout choice -q -o " + Tmp("o4") + " --max-candidates 1");
  EXPECT_EQ(few.code, 2);
  EXPECT_NE(few.err.find("--max-candidates"), std::string::npos) << few.err;
  std::string plan = Tmp("bad_plan.json");
  std::ofstream(plan) << R"({"limits": {"max_depth": 1e400}})";
  CliRun p = Prefsift("check --plan " + plan + " -q");
  EXPECT_EQ(p.code, 2) << p.err;
  EXPECT_NE(p.err.find(plan), std::string::npos) << p.err;
}

TEST(Cli, MalformedRecordsAreRejectsNotErrors) {
  std::string out = Tmp("o5");
  // 6 of its 7 lines are bad on purpose: past limits.max_reject_share, so the
  // run stops (exit 8) unless the share is raised; then the default gate's
  // min_kept_share (0.5) fails (exit 4) unless the plan sets no gate.
  CliRun stop = Prefsift("check " + Corpus("invalid_utf8.jsonl") + " --layout choice -q --overwrite -o " + out);
  EXPECT_EQ(stop.code, 8) << stop.err;
  CliRun g = Prefsift("check " + Corpus("invalid_utf8.jsonl") +
                      " --layout choice -q --overwrite --max-reject-share 1 -o " + out);
  EXPECT_EQ(g.code, 4) << g.err;
  std::string no_gate = Tmp("no_gate.json");
  std::ofstream(no_gate) << R"({"gate": {}})";
  CliRun r = Prefsift("check " + Corpus("invalid_utf8.jsonl") + " --plan " + no_gate +
                      " --layout choice -q --overwrite --max-reject-share 1 -o " + out);
  EXPECT_EQ(r.code, 0) << r.err;
  CliRun s = Prefsift("check " + Corpus("invalid_utf8.jsonl") + " --plan " + no_gate +
                      " --layout choice -q --overwrite --strict --max-reject-share 1 -o " + out);
  EXPECT_EQ(s.code, 5) << s.err;
}

TEST(Cli, LimitFlagsApplyAndAreNamedInRejects) {
  std::string out = Tmp("o6");
  // Both records are over the limit: nothing is kept (exit 6), and rejects.jsonl says why.
  CliRun r = Prefsift("check " + Corpus("crlf.jsonl") + " --layout choice -q --overwrite --max-reject-share 1 --max-line-bytes 40 -o " + out);
  ASSERT_EQ(r.code, 6) << r.err;
  std::ifstream in(out + "/rejects.jsonl");
  std::string line;
  int n = 0;
  while (std::getline(in, line)) {
    Json j = Json::parse(line);
    EXPECT_EQ(j["reason"], "line_too_long");
    EXPECT_NE(j["message"].get<std::string>().find("limits.max_line_bytes = 40"), std::string::npos) << line;
    ++n;
  }
  EXPECT_EQ(n, 2);
  CliRun c = Prefsift("check " + Corpus("ranking_gaps.jsonl") + " --layout ranked -q --overwrite --max-reject-share 1 --max-candidates 2 -o " + out);
  ASSERT_EQ(c.code, 6) << c.err;  // every record over a limit: nothing kept
  EXPECT_NE(Slurp(out + "/rejects.jsonl").find("too_many_candidates"), std::string::npos);
  CliRun t = Prefsift("check " + Corpus("crlf.jsonl") + " --layout choice -q --overwrite --max-reject-share 1 --max-text-bytes 2 -o " + out);
  ASSERT_EQ(t.code, 6) << t.err;
  EXPECT_NE(Slurp(out + "/rejects.jsonl").find("limits.max_text_bytes = 2"), std::string::npos);
  CliRun d = Prefsift("check " + Corpus("crlf.jsonl") + " --layout choice -q --overwrite --max-depth 1 -o " + out);
  ASSERT_EQ(d.code, 8) << d.err;  // one reason rejects every record: the run stops and says so
  EXPECT_NE(d.err.find("json_too_deep"), std::string::npos) << d.err;
  d = Prefsift("check " + Corpus("crlf.jsonl") + " --layout choice -q --overwrite --max-reject-share 1 --max-depth 1 -o " + out);
  ASSERT_EQ(d.code, 6) << d.err;
  EXPECT_NE(Slurp(out + "/rejects.jsonl").find("json_too_deep"), std::string::npos);
}

}  // namespace
