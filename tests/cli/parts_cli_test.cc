// `prefsift observe`, `decide` and `apply` from the command line (docs/cli.md,
// docs/parts.md): on the samples, one whole-file part per input, the gate
// verdict (exit code) and the concatenated files equal `prefsift run`'s; a
// step run again with --overwrite gives the same bytes; a damaged state file
// is refused with exit 3 and its name.
#include <gtest/gtest.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>

namespace {

namespace fs = std::filesystem;

struct CliRun {
  int code;
  std::string err;
};

std::string Tmp(const std::string& name) {
  return ::testing::TempDir() + "cliparts_" + std::to_string(::getpid()) + "_" + name;
}

std::string Slurp(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

CliRun Prefsift(const std::string& args) {
  const std::string err = Tmp("stderr.txt");
  const std::string cmd = "SOURCE_DATE_EPOCH=1780000000 " + std::string(PREFSIFT_BINARY) + " " + args + " -q 2>" + err;
  int st = std::system(cmd.c_str());
  return {WIFEXITED(st) ? WEXITSTATUS(st) : -1, Slurp(err)};
}

TEST(PartsCli, ThreeStepsGiveRunsFilesAndVerdict) {
  const std::string plan = std::string(PREFSIFT_SOURCE_DIR) + "/samples/demo-plan.json";
  const std::string whole = Tmp("run");
  CliRun run = Prefsift("run --plan " + plan + " --out " + whole);
  ASSERT_TRUE(run.code == 0 || run.code == 4) << run.err;
  std::string states;
  for (int k = 0; k < 3; ++k) {  // without --parts: part k is input k, whole
    const std::string state = Tmp("part" + std::to_string(k) + ".state");
    CliRun o = Prefsift("observe --plan " + plan + " --part " + std::to_string(k) + " --out " + state);
    ASSERT_EQ(o.code, 0) << o.err;
    states += " " + state;
  }
  const std::string decided = Tmp("decided");
  CliRun d = Prefsift("decide --plan " + plan + " --out " + decided + " --state" + states);
  EXPECT_EQ(d.code, run.code) << d.err;  // the gate verdict
  std::string joined_train, joined_rejects;
  for (int k = 0; k < 3; ++k) {
    const std::string out = Tmp("apply" + std::to_string(k));
    const std::string args = "apply --plan " + plan + " --part " + std::to_string(k) + " --decisions " + decided +
                             "/part-" + std::to_string(k) + ".decisions --out " + out;
    CliRun a = Prefsift(args);
    ASSERT_EQ(a.code, 0) << a.err;
    const std::string first = Slurp(out + "/rejects.jsonl");
    CliRun again = Prefsift(args + " --overwrite");  // a re-run task gives the same files
    ASSERT_EQ(again.code, 0) << again.err;
    EXPECT_EQ(Slurp(out + "/rejects.jsonl"), first);
    joined_train += Slurp(out + "/train.comparisons.jsonl");
    joined_rejects += first;
  }
  EXPECT_EQ(joined_train, Slurp(whole + "/train.comparisons.jsonl"));
  EXPECT_EQ(joined_rejects, Slurp(whole + "/rejects.jsonl"));
  EXPECT_EQ(Slurp(decided + "/personal_data_findings.jsonl"), Slurp(whole + "/personal_data_findings.jsonl"));

  // A damaged state file: exit 3, named.
  const std::string bad = Tmp("bad.state");
  std::string bytes = Slurp(Tmp("part0.state"));
  bytes[bytes.size() / 3] ^= 1;
  std::ofstream(bad, std::ios::binary) << bytes;
  CliRun b = Prefsift("decide --plan " + plan + " --out " + Tmp("decided_bad") + " --state " + bad + " " +
                      Tmp("part1.state") + " " + Tmp("part2.state"));
  EXPECT_EQ(b.code, 3) << b.err;
  EXPECT_NE(b.err.find(bad), std::string::npos) << b.err;
  EXPECT_NE(b.err.find("checksum"), std::string::npos) << b.err;
  EXPECT_FALSE(fs::exists(Tmp("decided_bad")));
}

}  // namespace
