// `prefsift cut` from the command line (docs/cli.md, docs/scale.md): the
// parts file for the demo plan, its exit codes and messages.
#include <gtest/gtest.h>
#include <nlohmann/json.hpp>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>

namespace {

struct CliRun {
  int code;
  std::string out, err;
};

std::string Tmp(const std::string& name) {
  return ::testing::TempDir() + "clicut_" + std::to_string(::getpid()) + "_" + name;
}

std::string Slurp(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

CliRun Prefsift(const std::string& args) {
  const std::string out = Tmp("stdout.txt"), err = Tmp("stderr.txt");
  int st = std::system((std::string(PREFSIFT_BINARY) + " " + args + " >" + out + " 2>" + err).c_str());
  return {WIFEXITED(st) ? WEXITSTATUS(st) : -1, Slurp(out), Slurp(err)};
}

const std::string kPlan = std::string(PREFSIFT_SOURCE_DIR) + "/samples/demo-plan.json";

TEST(CutCli, WritesThePartsFileOfTheDemoPlan) {
  std::string dir = Tmp("work");
  std::filesystem::remove_all(dir);
  CliRun r = Prefsift("cut --plan " + kPlan + " --parts 5 --out " + dir + "/parts.json");
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_NE(r.err.find("wrote " + dir + "/parts.json (5 parts)"), std::string::npos) << r.err;
  auto j = nlohmann::json::parse(Slurp(dir + "/parts.json"));
  ASSERT_EQ(j["parts"].size(), 5u);
  // The demo's three inputs: comparisons.jsonl (7.3 MB) takes three parts, the others one each.
  EXPECT_EQ(j["parts"][2]["input"], 0);
  EXPECT_EQ(j["parts"][3]["input"], 1);
  EXPECT_EQ(j["parts"][4]["input"], 2);
  // Line numbers: the first line of part 1 is the line after the last of part 0 (counted here).
  std::string data = Slurp(std::string(PREFSIFT_SOURCE_DIR) + "/samples/comparisons.jsonl");
  uint64_t begin = j["parts"][1]["begin"];
  EXPECT_EQ(data[begin - 1], '\n');
  EXPECT_EQ(j["parts"][1]["first_line"].get<uint64_t>(),
            1 + static_cast<uint64_t>(std::count(data.begin(), data.begin() + static_cast<long>(begin), '\n')));
  // The same again: exit 0, nothing changes; another count needs --overwrite.
  EXPECT_EQ(Prefsift("cut -q --plan " + kPlan + " --parts 5 --out " + dir + "/parts.json").code, 0);
  r = Prefsift("cut -q --plan " + kPlan + " --parts 6 --out " + dir + "/parts.json");
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("give --overwrite to replace it"), std::string::npos) << r.err;
  EXPECT_EQ(Prefsift("cut -q --plan " + kPlan + " --parts 6 --overwrite --out " + dir + "/parts.json").code, 0);
  EXPECT_EQ(nlohmann::json::parse(Slurp(dir + "/parts.json"))["parts"].size(), 6u);
  r = Prefsift("cut -q --plan " + kPlan + " --part-bytes 1M --overwrite --out " + dir + "/parts.json");
  EXPECT_EQ(r.code, 0) << r.err;
  // 7,317,977 / 1 MiB rounds up to 7; 1,204,896 and 1,116,503 bytes to 2 each.
  EXPECT_EQ(nlohmann::json::parse(Slurp(dir + "/parts.json"))["parts"].size(), 11u);
  std::filesystem::remove_all(dir);
}

TEST(CutCli, UsageErrors) {
  std::string out = Tmp("p.json");
  CliRun r = Prefsift("cut --plan " + kPlan + " --out " + out);
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("--parts N or --part-bytes SIZE"), std::string::npos) << r.err;
  r = Prefsift("cut --plan " + kPlan + " --parts 2 --out " + out);
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("2 parts are too few: the plan has 3 inputs"), std::string::npos) << r.err;
  r = Prefsift("cut --plan " + kPlan + " --parts 4 --part-bytes 1M --out " + out);
  EXPECT_EQ(r.code, 2);
  // The parts file may not replace an input.
  r = Prefsift("cut --plan " + kPlan + " --parts 3 --overwrite --out " + std::string(PREFSIFT_SOURCE_DIR) +
               "/samples/pairwise.jsonl");
  EXPECT_EQ(r.code, 2);
  EXPECT_FALSE(std::filesystem::exists(out));
  // A folder for --out is named as such.
  std::filesystem::create_directories(Tmp("dir"));
  r = Prefsift("cut --plan " + kPlan + " --parts 3 --out " + Tmp("dir"));
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("is a folder; --out names the parts file"), std::string::npos) << r.err;
  std::filesystem::remove_all(Tmp("dir"));
}

}  // namespace
