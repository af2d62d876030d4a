// First contact: what a new user's first runs do to prefsift (issue "safe on
// first contact"). Each case is a defect that was seen once: no input may crash
// the process, outputs never touch inputs, nothing passes silently, the choice
// base is never guessed, and layouts need only what they use. Exit codes are
// the ones in docs/cli.md (cli/exit_codes.h).
#include <gtest/gtest.h>
#include <nlohmann/json.hpp>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <thread>

namespace {

namespace fs = std::filesystem;
using Json = nlohmann::ordered_json;

struct CliRun {
  int code;
  std::string err;
};

// A fresh folder per test and process (ctest runs tests in parallel processes).
std::string Dir(const std::string& test) {
  std::string d = ::testing::TempDir() + "first_contact_" + std::to_string(::getpid()) + "_" + test;
  fs::remove_all(d);
  fs::create_directories(d);
  return d;
}

std::string Slurp(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

void Write(const std::string& path, const std::string& bytes) { std::ofstream(path, std::ios::binary) << bytes; }

// Runs `BINARY ARGS` in `cwd` with stderr captured; stdout discarded.
CliRun Prefsift(const std::string& cwd, const std::string& args, const std::string& binary = PREFSIFT_BINARY) {
  std::string err = cwd + "/stderr.txt";
  std::string cmd = "cd '" + cwd + "' && " + binary + " " + args + " >/dev/null 2>'" + err + "'";
  int st = std::system(cmd.c_str());
  return {WIFEXITED(st) ? WEXITSTATUS(st) : (WIFSIGNALED(st) ? 128 + WTERMSIG(st) : -1), Slurp(err)};
}

bool HasPartialFolder(const std::string& dir) {
  for (const auto& e : fs::directory_iterator(dir)) {
    if (e.path().filename().string().find(".partial-") != std::string::npos) return true;
  }
  return false;
}

std::string Good(int i, int choice) {
  return R"({"id":"r)" + std::to_string(i) + R"(","prompt":"how do I water seedlings number )" + std::to_string(i) +
         R"(","candidates":["gently from below","with a hose at full blast"],"choice":)" + std::to_string(choice) +
         "}\n";
}

// Good(i, i % 2) for i in [0, n): n valid records, choices alternating.
std::string GoodLines(int n) {
  std::string lines;
  for (int i = 0; i < n; ++i) lines += Good(i, i % 2);
  return lines;
}

// --- 1. No input can crash the process -----------------------------------

TEST(FirstContact, NonUtf8LinesAreRejectedLosslesslyNotACrash) {
  std::string d = Dir("non_utf8");
  // 0xFF 0x22 (seen aborting with exit 134), a Latin-1 line cut short, random bytes.
  const std::string bad1 = "\xff\x22", bad2 = "{\"id\":\"x\",\"prompt\":\"caf\xe9", bad3 = "\x80\x81\x82\xfe\x01{";
  std::string in = Good(1, 0) + bad1 + "\n" + Good(2, 1) + bad2 + "\n" + bad3 + "\n" + Good(3, 0) + Good(4, 1);
  Write(d + "/in.jsonl", in);
  CliRun r = Prefsift(d, "run in.jsonl --layout choice -q -o out --max-reject-share 1");
  EXPECT_EQ(r.code, 0) << r.err;
  EXPECT_FALSE(HasPartialFolder(d));
  std::ifstream rejects(d + "/out/rejects.jsonl");
  std::string line;
  std::vector<std::string> raw;
  while (std::getline(rejects, line)) {
    Json j = Json::parse(line, nullptr, false);
    ASSERT_FALSE(j.is_discarded()) << "every reject line is JSON: " << line;
    ASSERT_TRUE(j.contains("record_base64")) << line;
    raw.push_back(j["record_base64"].get<std::string>());
  }
  ASSERT_EQ(raw.size(), 3u);
  // RFC 4648 section 4 base64 of the exact bytes (worked by hand: FF 22 -> "/yI=").
  EXPECT_EQ(raw[0], "/yI=");
}

TEST(FirstContact, SigtermRemovesThePartialFolder) {
  std::string d = Dir("sigterm");
  Write(d + "/in.jsonl", GoodLines(60000));
  pid_t pid = ::fork();
  ASSERT_GE(pid, 0);
  if (pid == 0) {
    ::chdir(d.c_str());
    ::execl(PREFSIFT_BINARY, PREFSIFT_BINARY, "run", "in.jsonl", "--layout", "choice", "-q", "-o", "out", "--threads",
            "1", static_cast<char*>(nullptr));
    ::_exit(127);
  }
  // Wait until the staging folder exists, then stop the run.
  bool seen = false;
  for (int i = 0; i < 400 && !seen; ++i) {
    std::this_thread::sleep_for(std::chrono::milliseconds(10));
    seen = HasPartialFolder(d);
  }
  ::kill(pid, SIGTERM);
  int st = 0;
  ::waitpid(pid, &st, 0);
  if (!seen && WIFEXITED(st)) GTEST_SKIP() << "the run finished before it could be stopped";
  EXPECT_TRUE(WIFSIGNALED(st) && WTERMSIG(st) == SIGTERM) << "ends as SIGTERM would";
  EXPECT_FALSE(HasPartialFolder(d)) << "the partial output folder is removed on SIGTERM";
  EXPECT_FALSE(fs::exists(d + "/out"));
}

TEST(FirstContact, ClosedLogPipeLeavesNoPartialFolder) {
  // `prefsift run ... 2>&1 | head -c 1`: the log's reader goes away after the
  // first byte. The run neither dies half-way leaving its staging folder (the
  // default action of SIGPIPE) nor loses its output: it finishes.
  std::string d = Dir("closed_pipe");
  Write(d + "/in.jsonl", GoodLines(3000));
  std::string cmd = "cd '" + d + "' && { " + std::string(PREFSIFT_BINARY) +
                    " run in.jsonl --layout choice -o out --progress --progress-seconds 0 --timings 2>&1; "
                    "echo \"rc=$?\" > rc.txt; } | head -c 1 >/dev/null";
  std::system(cmd.c_str());
  EXPECT_FALSE(HasPartialFolder(d));
  EXPECT_EQ(Slurp(d + "/rc.txt"), "rc=0\n");
  EXPECT_TRUE(fs::exists(d + "/out/summary.json"));
}

TEST(FirstContact, TimingsNameEachPhaseAndThePeakMemory) {
  // --timings: a line a phase, the end of pass 1 among them, and a
  // "timing rss:" line after each phase in which the peak resident size grew
  // (the first phase always: the process had none before).
  std::string d = Dir("timings");
  Write(d + "/in.jsonl", GoodLines(200));
  CliRun r = Prefsift(d, "run in.jsonl --layout choice -o out -q --timings");
  ASSERT_EQ(r.code, 0) << r.err;
  EXPECT_NE(r.err.find("timing: observe (pass 1)"), std::string::npos) << r.err;
  EXPECT_NE(r.err.find("timing: decide (end of pass 1)"), std::string::npos) << r.err;
  // The stages' set-up first, on a line of its own.
  EXPECT_LT(r.err.find("timing: set-up"), r.err.find("timing: observe (pass 1)")) << r.err;
  const size_t at = r.err.find("timing rss:   peak so far");
  ASSERT_NE(at, std::string::npos) << r.err;
  EXPECT_GT(std::stod(r.err.substr(at + std::string("timing rss:   peak so far").size())), 1.0) << r.err;
  EXPECT_LT(at, r.err.find("timing: observe (pass 1)")) << "the first phase's line follows it";
  // Pass 1's one-thread parts, after its CPU lines and before the next phase.
  const size_t wait = r.err.find("timing wall:  waiting for input"), in_order = r.err.find("timing wall:  in order");
  ASSERT_NE(wait, std::string::npos) << r.err;
  ASSERT_NE(in_order, std::string::npos) << r.err;
  EXPECT_LT(r.err.find("timing cpu:   read and facts"), wait) << r.err;
  EXPECT_LT(in_order, r.err.find("timing: decide (end of pass 1)")) << r.err;
}

// --- 2. Outputs never touch inputs ------------------------------------------

TEST(FirstContact, OutputThatIsTheInputIsRefused) {
  std::string d = Dir("out_is_input");
  Write(d + "/data.jsonl", Good(1, 0) + Good(2, 1));
  const std::string before = Slurp(d + "/data.jsonl");
  CliRun r = Prefsift(d, "run data.jsonl --layout choice -q -o data.jsonl --overwrite");
  EXPECT_EQ(r.code, 2) << r.err;
  EXPECT_NE(r.err.find("data.jsonl"), std::string::npos) << r.err;
  EXPECT_NE(r.err.find("input"), std::string::npos) << r.err;
  ASSERT_TRUE(fs::is_regular_file(d + "/data.jsonl"));
  EXPECT_EQ(Slurp(d + "/data.jsonl"), before);
  // The same path spelt differently.
  r = Prefsift(d, "run data.jsonl --layout choice -q -o ./x/../data.jsonl/ --overwrite");
  EXPECT_EQ(r.code, 2) << r.err;
  EXPECT_EQ(Slurp(d + "/data.jsonl"), before);
}

TEST(FirstContact, OutputThatContainsTheInputIsRefused) {
  std::string d = Dir("out_contains_input");
  fs::create_directories(d + "/nest");
  Write(d + "/nest/in.jsonl", Good(1, 0) + Good(2, 1));
  CliRun r = Prefsift(d, "run nest/in.jsonl --layout choice -q -o nest --overwrite");
  EXPECT_EQ(r.code, 2) << r.err;
  EXPECT_NE(r.err.find("nest/in.jsonl"), std::string::npos) << r.err;
  EXPECT_TRUE(fs::exists(d + "/nest/in.jsonl"));
}

TEST(FirstContact, OutputInsideOrOverThePlanEvalSetOrKeyIsRefused) {
  std::string d = Dir("out_plan_files");
  Write(d + "/in.jsonl", Good(1, 0) + Good(2, 1));
  Write(d + "/eval.txt", "how do I water seedlings number 1\n");
  Write(d + "/key.txt", "a made-up key for tests only, never for real data\n");
  Write(d + "/plan.json", R"({"inputs":[{"path":"in.jsonl","layout":{"preset":"choice"}}],
    "stages":{"leakage":{"eval_sets":[{"name":"e","path":"eval.txt"}]},
              "screen":{"action":"pseudonymise","key_file":"key.txt"}}})");
  for (const char* out : {"plan.json", "eval.txt", "key.txt"}) {
    CliRun r = Prefsift(d, std::string("run --plan plan.json -q --overwrite -o ") + out);
    EXPECT_EQ(r.code, 2) << out << ": " << r.err;
    EXPECT_NE(r.err.find(out), std::string::npos) << r.err;
    EXPECT_TRUE(fs::is_regular_file(d + "/" + out)) << out;
  }
}

TEST(FirstContact, AnExistingFileIsNeverReplacedByTheOutputFolder) {
  std::string d = Dir("out_is_file");
  Write(d + "/in.jsonl", Good(1, 0) + Good(2, 1));
  Write(d + "/afile", "keep me\n");
  for (const char* flags : {"", " --overwrite"}) {
    CliRun r = Prefsift(d, std::string("run in.jsonl --layout choice -q -o afile") + flags);
    EXPECT_EQ(r.code, 2) << r.err;
    EXPECT_NE(r.err.find("afile"), std::string::npos) << r.err;
    EXPECT_EQ(Slurp(d + "/afile"), "keep me\n");
  }
}

// --- 3. No silent pass ----------------------------------------------------

TEST(FirstContact, APointerTypoThatRejectsEverythingStops) {
  std::string d = Dir("pointer_typo");
  Write(d + "/in.jsonl", GoodLines(20));
  CliRun r = Prefsift(d, "run in.jsonl --field prompt=/promt --field candidates=/candidates --field choice=/choice -q -o out");
  EXPECT_EQ(r.code, 8) << r.err;
  EXPECT_NE(r.err.find("/promt"), std::string::npos) << "names the pointer: " << r.err;
  EXPECT_NE(r.err.find("\"prompt\""), std::string::npos) << "shows the keys of the first rejected line: " << r.err;
  EXPECT_FALSE(fs::exists(d + "/out"));
  EXPECT_FALSE(HasPartialFolder(d));
  // The share is a setting: at 1 the run goes on, and then nothing is kept (exit 6).
  r = Prefsift(d, "run in.jsonl --field prompt=/promt --field candidates=/candidates --field choice=/choice -q -o out "
             "--max-reject-share 1");
  EXPECT_EQ(r.code, 6) << r.err;
  EXPECT_TRUE(fs::exists(d + "/out/rejects.jsonl")) << "outputs are written for review";
}

TEST(FirstContact, NothingKeptIsNotASuccess) {
  std::string d = Dir("nothing_kept");
  // Every record is an exact duplicate of... itself with the other label: no
  // majority, so the exact stage rejects all four (docs/exact-duplicates.md).
  Write(d + "/in.jsonl", Good(1, 0) + Good(1, 1));
  CliRun r = Prefsift(d, "dedup in.jsonl --field prompt=/prompt --field candidates=/candidates --field choice=/choice "
                    "--field choice_base=0 -q -o out");
  EXPECT_EQ(r.code, 6) << r.err;
  EXPECT_NE(r.err.find("rejected"), std::string::npos) << r.err;
}

TEST(FirstContact, AnEmptyInputIsNotASuccess) {
  std::string d = Dir("empty");
  Write(d + "/empty.jsonl", "");
  Write(d + "/blank.jsonl", "\n  \n\n");
  for (const char* f : {"empty.jsonl", "blank.jsonl"}) {
    CliRun r = Prefsift(d, std::string("run ") + f + " --layout choice -q -o out");
    EXPECT_EQ(r.code, 7) << f << ": " << r.err;
    EXPECT_NE(r.err.find(f), std::string::npos) << r.err;
    EXPECT_FALSE(fs::exists(d + "/out"));
  }
}

TEST(FirstContact, AnIncompleteGateFailsUnlessThePlanAllowsIt) {
  std::string d = Dir("incomplete_gate");
  Write(d + "/in.jsonl", Good(1, 0) + Good(2, 1) + Good(3, 0));
  // The plan switches the bias stage off, so this check cannot be evaluated.
  Write(d + "/plan.json", R"({"stages": {"bias": {"enabled": false}}, "gate": {"max_shortcut_accuracy": 0.6}})");
  Write(d + "/plan-pass.json", R"({"stages": {"bias": {"enabled": false}},
                                   "gate": {"max_shortcut_accuracy": 0.6, "on_incomplete": "pass"}})");
  CliRun r = Prefsift(d, "run in.jsonl --plan plan.json --layout choice -o out");
  EXPECT_EQ(r.code, 4) << r.err;
  EXPECT_NE(r.err.find("incomplete"), std::string::npos) << r.err;
  Json g = Json::parse(Slurp(d + "/out/summary.json"))["gate"];
  EXPECT_EQ(g["verdict"], "incomplete");
  EXPECT_EQ(g["fails_the_run"], true);
  r = Prefsift(d, "run in.jsonl --plan plan-pass.json --layout choice -q -o out2");
  EXPECT_EQ(r.code, 0) << r.err;
  // A command that runs one stage skips the checks of the others.
  r = Prefsift(d, "dedup in.jsonl --plan plan.json --layout choice -q -o out3");
  EXPECT_EQ(r.code, 0) << r.err;
}

TEST(FirstContact, APlanWithoutAGateGetsTheDefaultGate) {
  std::string d = Dir("default_gate");
  Write(d + "/in.jsonl", Good(1, 0) + Good(2, 1) + Good(3, 0));
  CliRun r = Prefsift(d, "run in.jsonl --layout choice -q -o out");
  EXPECT_EQ(r.code, 0) << r.err;
  Json g = Json::parse(Slurp(d + "/out/summary.json"))["gate"];
  EXPECT_EQ(g["default_gate"], true);
  bool kept_share = false;
  for (const auto& c : g["checks"]) kept_share = kept_share || c["check"] == "min_kept_share";
  EXPECT_TRUE(kept_share) << g.dump();
  // Half the records unreadable: the default min_kept_share (0.5) still passes at
  // exactly half; below it the default gate fails.
  Write(d + "/half.jsonl", Good(1, 0) + Good(2, 1) + "nope\nnope\nnope\n");
  r = Prefsift(d, "run half.jsonl --layout choice -q -o out2 --max-reject-share 1");
  EXPECT_EQ(r.code, 4) << r.err;
}

// --- 4. The choice base is never guessed ------------------------------------

TEST(FirstContact, OneBasedChoicesStopWithTheCounts) {
  std::string d = Dir("one_based");
  std::string in;
  for (int i = 0; i < 10; ++i) in += Good(i, 1 + i % 2);  // picks 1 or 2 of B = 2: never 0
  Write(d + "/in.jsonl", in);
  CliRun r = Prefsift(d, "run in.jsonl --layout choice -q -o out");
  EXPECT_EQ(r.code, 2) << r.err;
  EXPECT_NE(r.err.find("choice_base"), std::string::npos) << r.err;
  EXPECT_NE(r.err.find("5 name candidate B"), std::string::npos) << r.err;
  EXPECT_FALSE(fs::exists(d + "/out"));
  // Stated, it runs; and slot 2 of 2 is the second candidate.
  r = Prefsift(d, "run in.jsonl --layout choice --field choice_base=1 -q -o out");
  EXPECT_EQ(r.code, 0) << r.err;
  // Stated as 0, the user asked for it: the records that pick 2 are rejected as out of range.
  r = Prefsift(d, "check in.jsonl --layout choice --field choice_base=0 -q -o out0 --max-reject-share 1");
  EXPECT_EQ(r.code, 0) << r.err;
}

TEST(FirstContact, ZeroBasedRanksStopWithTheCounts) {
  std::string d = Dir("zero_ranks");
  std::string in;
  for (int i = 0; i < 6; ++i) {
    in += R"({"id":"r)" + std::to_string(i) + R"(","prompt":"p)" + std::to_string(i) +
          R"(","candidates":["a","b","c"],"ranks":[0,2,1]})" "\n";
  }
  Write(d + "/in.jsonl", in);
  CliRun r = Prefsift(d, "run in.jsonl --layout ranked -q -o out");
  EXPECT_EQ(r.code, 2) << r.err;
  EXPECT_NE(r.err.find("rank_base"), std::string::npos) << r.err;
  r = Prefsift(d, "check in.jsonl --layout ranked --field rank_base=0 -q -o out");
  EXPECT_EQ(r.code, 0) << r.err;
  EXPECT_EQ(Slurp(d + "/out/rejects.jsonl"), "");
}

// --- 5. Layouts -----------------------------------------------------------

TEST(FirstContact, EveryPresetTakesRecordsWithoutAnId) {
  std::string d = Dir("no_id");
  Write(d + "/choice.jsonl", R"({"prompt":"p1","candidates":["a","b"],"choice":0})" "\n"
                             R"({"prompt":"p2","candidates":["a","b"],"choice":1})" "\n");
  Write(d + "/pairwise.jsonl", R"({"prompt":"p1","chosen":"a","rejected":"b"})" "\n");
  Write(d + "/ranked.jsonl", R"({"prompt":"p1","candidates":["a","b"],"ranks":[2,1]})" "\n");
  Write(d + "/ordered.jsonl", R"({"prompt":"p1","candidates":["a","b"],"order":[1,0]})" "\n");
  for (const char* preset : {"choice", "pairwise", "ranked", "ordered"}) {
    CliRun r = Prefsift(d, std::string("check ") + preset + ".jsonl --layout " + preset + " -q -o out-" + preset);
    EXPECT_EQ(r.code, 0) << preset << ": " << r.err;
    EXPECT_EQ(Slurp(d + "/out-" + preset + "/rejects.jsonl"), "") << preset;
  }
  // An id pointer the user names is required: a typo there is not silently ignored.
  CliRun r = Prefsift(d, "check choice.jsonl --layout choice --field id=/uid -q -o out-named --max-reject-share 1");
  EXPECT_EQ(r.code, 6) << r.err;
}

TEST(FirstContact, UserAndSystemRoleNamesAreLayoutKeys) {
  std::string d = Dir("roles");
  const std::string q = "my seed packets got damp in the shed, can I still sow them this spring";
  // Three verbatim copies of an evaluation question asked by a "customer",
  // each after a long system turn that must not count as prompt text.
  std::string in;
  for (int i = 0; i < 3; ++i) {
    in += R"({"id":"c)" + std::to_string(i) +
          R"(","prompt":[{"role":"system","content":"You are the friendly assistant of an invented seed library. Answer briefly and kindly, and never give medical advice to anyone at all."},{"role":"customer","content":")" +
          q + R"("}],"candidates":["yes if dry now","no"],"choice":0})" "\n";
  }
  for (int i = 0; i < 3; ++i) in += Good(10 + i, i % 2);
  Write(d + "/in.jsonl", in);
  Write(d + "/eval.txt", q + "\n");
  Write(d + "/plan.json", R"({"inputs":[{"path":"in.jsonl","layout":{"preset":"choice"}}],
    "stages":{"leakage":{"eval_sets":[{"name":"e","path":"eval.txt"}]}}, "gate": {}})");
  CliRun r = Prefsift(d, "leakage --plan plan.json -q -o out");
  EXPECT_EQ(r.code, 0) << r.err;
  Json s = Json::parse(Slurp(d + "/out/summary.json"));
  EXPECT_EQ(s["ledger"]["rejected"], 3) << "all three verbatim copies found with the default role words";
  // A role word outside the defaults, named in the layout.
  std::string in2 = in;
  for (size_t p = in2.find("\"customer\""); p != std::string::npos; p = in2.find("\"customer\"")) {
    in2.replace(p, 10, "\"shopper\"");
  }
  for (size_t p = in2.find("\"system\""); p != std::string::npos; p = in2.find("\"system\"")) {
    in2.replace(p, 8, "\"setup\"");
  }
  Write(d + "/in2.jsonl", in2);
  Write(d + "/plan2.json", R"({"inputs":[{"path":"in2.jsonl","layout":{"preset":"choice",
      "user_roles":["shopper"], "system_roles":["setup"]}}],
    "stages":{"leakage":{"eval_sets":[{"name":"e","path":"eval.txt"}]}}, "gate": {}})");
  r = Prefsift(d, "leakage --plan plan2.json -q -o out2");
  EXPECT_EQ(r.code, 0) << r.err;
  s = Json::parse(Slurp(d + "/out2/summary.json"));
  EXPECT_EQ(s["ledger"]["rejected"], 3) << "found with the role names from the layout";
}

TEST(FirstContact, ABinaryOutsideTheCheckoutFindsItsRulePacks) {
  // A copy of the binary in a folder with no rules/ anywhere above it stands
  // in for a build outside the source tree (cmake -B /elsewhere).
  std::string d = Dir("out_of_tree");
  fs::create_directories(d + "/elsewhere/bin");
  fs::copy_file(PREFSIFT_BINARY, d + "/elsewhere/bin/prefsift");
  Write(d + "/in.jsonl", Good(1, 0) + Good(2, 1));
  CliRun r = Prefsift(d, "screen in.jsonl --layout choice -q -o out", d + "/elsewhere/bin/prefsift");
  EXPECT_EQ(r.code, 0) << r.err;
  EXPECT_TRUE(fs::exists(d + "/out/summary.json"));
}

}  // namespace
