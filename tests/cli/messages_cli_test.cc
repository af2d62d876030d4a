// Messages a user can act on (docs/cli.md): an unknown command is named with
// the nearest one; plan errors give file:line:column and the key path in the
// plan's own terms, never the JSON library's wording; every command's --help
// has an example; a stage command that can do nothing says so and exits 2;
// the stages' essential settings work without a plan; --progress writes lines
// with a percentage and the time left when stderr is not a terminal.
#include <gtest/gtest.h>
#include <nlohmann/json.hpp>
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
  std::string out, err;
};

std::string Tmp(const std::string& name) {
  return ::testing::TempDir() + "climsg_" + std::to_string(::getpid()) + "_" + name;
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

std::string WritePlan(const std::string& name, const std::string& text) {
  std::string path = Tmp(name);
  std::ofstream(path) << text;
  return path;
}

std::string Samples(const std::string& f) { return std::string(PREFSIFT_SOURCE_DIR) + "/samples/" + f; }

TEST(Messages, UnknownCommandIsNamedWithTheNearestOne) {
  CliRun r = Prefsift("runn");
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("unknown command \"runn\" (did you mean \"run\"?)"), std::string::npos) << r.err;
  EXPECT_EQ(r.err.find("A subcommand is required"), std::string::npos) << r.err;
  r = Prefsift("lekage x.jsonl");
  EXPECT_NE(r.err.find("did you mean \"leakage\"?"), std::string::npos) << r.err;
  r = Prefsift("store-reprot --store x.db");
  EXPECT_NE(r.err.find("did you mean \"store-report\"?"), std::string::npos) << r.err;
  r = Prefsift("frobnicate");  // nothing near: named, no guess
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("unknown command \"frobnicate\""), std::string::npos) << r.err;
  EXPECT_EQ(r.err.find("did you mean"), std::string::npos) << r.err;
}

TEST(Messages, PlanSyntaxErrorHasLineColumnAndNoLibraryWording) {
  std::string plan = WritePlan("syntax.json", "{\"inputs\": [{\"path\": \"x.jsonl\",\n  \"layout\": }]}");
  CliRun r = Prefsift("run --plan " + plan + " -o " + Tmp("o"));
  EXPECT_EQ(r.code, 2);
  // The '}' is on line 2, column 13 (1-based; counted by hand).
  EXPECT_NE(r.err.find(plan + ":2:13: the plan is not valid JSON: unexpected '}'"), std::string::npos) << r.err;
  for (const char* internal : {"json.exception", "parse_error", "syntax error while parsing"}) {
    EXPECT_EQ(r.err.find(internal), std::string::npos) << r.err;
  }
  plan = WritePlan("eof.json", "{\"inputs\": [");
  r = Prefsift("run --plan " + plan + " -o " + Tmp("o"));
  EXPECT_NE(r.err.find("the file ends before the plan is complete"), std::string::npos) << r.err;
}

TEST(Messages, PlanValueErrorNamesTheKeyPathInThePlansTerms) {
  std::string plan = WritePlan("layout.json", "{\n  \"inputs\": [\n    {\"path\": \"x.jsonl\", \"layout\": 5}\n  ]\n}\n");
  CliRun r = Prefsift("run --plan " + plan + " -o " + Tmp("o"));
  EXPECT_EQ(r.code, 2);
  // "layout" is at line 3, column 25 (counted by hand).
  EXPECT_NE(r.err.find(plan + ":3:25: inputs[0].layout: a layout must be a JSON object"), std::string::npos) << r.err;
  EXPECT_EQ(r.err.find(".json.inputs"), std::string::npos) << r.err;  // never "plan.json.inputs[0]..."
  // An unknown top-level key, and an unknown stage, at their own places.
  plan = WritePlan("key.json", "{\"inputs\": [],\n \"ouput\": \"x\"}");
  r = Prefsift("run --plan " + plan);
  EXPECT_NE(r.err.find(plan + ":2:2: ouput: unknown key"), std::string::npos) << r.err;
  plan = WritePlan("stage.json", "{\"inputs\": [{\"path\": \"" + Samples("pairwise.jsonl") +
                                     "\", \"layout\": \"pairwise\"}],\n \"stages\": {\"neer\": {}}}");
  r = Prefsift("run --plan " + plan + " -o " + Tmp("o"));
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find(plan + ":2:13: stages.neer: unknown stage"), std::string::npos) << r.err;
  // A stage setting checked after loading is placed too.
  plan = WritePlan("setting.json", "{\"inputs\": [{\"path\": \"" + Samples("pairwise.jsonl") +
                                       "\", \"layout\": \"pairwise\"}],\n \"stages\": {\"exact\": {\"conflicts\": \"maybe\"}}}");
  r = Prefsift("dedup --plan " + plan + " -o " + Tmp("o"));
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find(plan + ":2:23: stages.exact.conflicts: must be"), std::string::npos) << r.err;
}

TEST(Messages, EveryCommandHelpHasAnExample) {
  for (const char* cmd : {"run", "check", "dedup", "near", "leakage", "screen", "bias", "split", "audit", "layouts",
                          "add", "history", "store-summary", "store-report", "shard-sign", "merge", "cut"}) {
    CliRun r = Prefsift(std::string(cmd) + " --help");
    EXPECT_EQ(r.code, 0) << cmd;
    size_t at = r.out.find("Example:\n  prefsift " + std::string(cmd));
    EXPECT_NE(at, std::string::npos) << cmd << ":\n" << r.out;
  }
  EXPECT_NE(Prefsift("--help").out.find("Example:\n  prefsift run"), std::string::npos);
}

TEST(Messages, StageThatCanDoNothingSaysSoAndFails) {
  CliRun r = Prefsift("leakage " + Samples("pairwise.jsonl") + " --layout pairwise -q -o " + Tmp("lk0"));
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("leakage: nothing to do: no evaluation sets; name one with --eval FILE"), std::string::npos)
      << r.err;
  EXPECT_FALSE(std::filesystem::exists(Tmp("lk0")));
  std::string plan = WritePlan("off.json", "{\"inputs\": [{\"path\": \"" + Samples("pairwise.jsonl") +
                                               "\", \"layout\": \"pairwise\"}], \"stages\": {\"near\": {\"enabled\": false}}}");
  r = Prefsift("near --plan " + plan + " -q -o " + Tmp("nr0"));
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("near: nothing to do: the plan disables this stage"), std::string::npos) << r.err;
  // A JSONL evaluation file needs the pointer of its prompt.
  r = Prefsift("leakage " + Samples("pairwise.jsonl") + " --layout pairwise --eval " + Samples("eval/staff_eval.jsonl") +
               " -q -o " + Tmp("lk1"));
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("needs the JSON Pointer of its prompt"), std::string::npos) << r.err;
}

TEST(Messages, StageSettingsWithoutAPlan) {
  const std::string in = Samples("pairwise.jsonl") + " --layout pairwise -q";
  CliRun r = Prefsift("leakage " + in + " --eval " + Samples("eval/heldout_questions.txt") + " --eval " +
                      Samples("eval/staff_eval.jsonl") + ":/question -o " + Tmp("lk"));
  ASSERT_EQ(r.code, 0) << r.err;
  Json s = Json::parse(Slurp(Tmp("lk") + "/summary.json"));
  ASSERT_EQ(s["stages"]["leakage"]["eval_sets"].size(), 2u);
  EXPECT_EQ(s["stages"]["leakage"]["eval_sets"][0]["name"], "heldout_questions");
  EXPECT_EQ(s["stages"]["leakage"]["eval_sets"][0]["items"], 150);  // lines of the file
  EXPECT_EQ(s["stages"]["leakage"]["eval_sets"][1]["format"], "jsonl");
  EXPECT_EQ(s["stages"]["leakage"]["eval_sets"][1]["items"], 100);
  r = Prefsift("split " + in + " --split train=0.9 --split test=0.1 -o " + Tmp("sp"));
  ASSERT_EQ(r.code, 0) << r.err;
  s = Json::parse(Slurp(Tmp("sp") + "/summary.json"));
  ASSERT_EQ(s["stages"]["split"]["splits"].size(), 2u);
  EXPECT_EQ(s["stages"]["split"]["splits"][0]["name"], "train");
  EXPECT_DOUBLE_EQ(s["stages"]["split"]["splits"][0]["ratio"].get<double>(), 0.9);
  r = Prefsift("near " + in + " --threshold 0.6 -o " + Tmp("nr"));
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_DOUBLE_EQ(Json::parse(Slurp(Tmp("nr") + "/summary.json"))["stages"]["near"]["settings"]["threshold"].get<double>(), 0.6);
  r = Prefsift("bias " + in + " --alpha 0.01 -o " + Tmp("bi"));
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_DOUBLE_EQ(Json::parse(Slurp(Tmp("bi") + "/summary.json"))["stages"]["bias"]["alpha"].get<double>(), 0.01);
  r = Prefsift("dedup " + in + " --conflicts drop-all -o " + Tmp("dd"));
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_EQ(Json::parse(Slurp(Tmp("dd") + "/summary.json"))["stages"]["exact"]["conflict_policy"], "drop-all");
  r = Prefsift("screen " + in + " --rules contact -o " + Tmp("sc"));
  ASSERT_EQ(r.code, 0) << r.err;
  Json packs = Json::parse(Slurp(Tmp("sc") + "/summary.json"))["stages"]["screen"]["packs"];
  ASSERT_EQ(packs.size(), 1u);
  EXPECT_EQ(packs[0]["file"], "contact.json");
  r = Prefsift("split " + in + " --split train=2 -o " + Tmp("sp2"));
  EXPECT_EQ(r.code, 2);
  EXPECT_NE(r.err.find("--split train=2: expected NAME=RATIO"), std::string::npos) << r.err;
}

TEST(Messages, ProgressLinesForLogs) {
  // stderr is a file here, not a terminal: without --progress no progress line.
  const std::string run = "run --plan " + Samples("demo-plan.json") + " --overwrite -o " + Tmp("pr");
  CliRun quiet = Prefsift(run);
  EXPECT_EQ(quiet.err.find("progress:"), std::string::npos) << quiet.err;
  CliRun r = Prefsift(run + " --progress --progress-seconds 0");
  ASSERT_TRUE(r.code == 0 || r.code == 4) << r.err;
  // Plain inputs: the size is known, so each line has a percentage and, past
  // the first percent, the time left.
  EXPECT_NE(r.err.find("progress: reading comparisons: 1024 lines"), std::string::npos) << r.err;
  EXPECT_NE(r.err.find("% of the pass, about "), std::string::npos) << r.err;
  EXPECT_NE(r.err.find(" s left\n"), std::string::npos) << r.err;
  EXPECT_NE(r.err.find("progress: writing "), std::string::npos) << r.err;
  EXPECT_EQ(r.err.find('\r'), std::string::npos) << "a log gets whole lines, no carriage returns";
  // -q wins.
  EXPECT_EQ(Prefsift(run + " --progress --progress-seconds 0 -q").err.find("progress:"), std::string::npos);
}

}  // namespace
