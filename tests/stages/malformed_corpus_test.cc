// The malformed-input corpus (tests/data/malformed/, docs/hardening.md) run
// through RunPipeline, one file at a time: every bad record gets its reject
// reason, a file that cannot be read is an input error naming the file, the
// ledger balances for every file (records in = kept + rejected = lines in the
// outputs), and a failed run leaves no output folder. Large cases (lines of
// many megabytes, thousands of nesting levels, B = 1000) are generated here
// rather than committed.
#include <gtest/gtest.h>
#include <unistd.h>

#include <sys/stat.h>

#include <chrono>
#include <filesystem>
#include <fstream>

#include "fault_fs.h"
#include "run_helpers.h"

namespace prefsift {
namespace {

using namespace prefsift::testing;  // NOLINT
using Json = nlohmann::ordered_json;

std::string CorpusDir() {
  return (std::filesystem::path(PREFSIFT_TEST_SOURCE_DIR) / "tests" / "data" / "malformed").string();
}

size_t CountLines(const std::string& path) {
  std::string s = ReadFile(path);
  return static_cast<size_t>(std::count(s.begin(), s.end(), '\n'));
}

struct Expect {
  std::string file;                  // in tests/data/malformed/, or an absolute path
  std::string layout;                // preset
  std::vector<std::string> reasons;  // per record in file order; "" = kept
  uint64_t blank_lines = 0;
};

// Runs one file with no stages (the `check` command) and checks reasons and
// the ledger. Returns the rejects for further checks.
std::vector<Json> RunAndCheck(const Expect& e, const Plan* plan_in = nullptr) {
  std::string in = e.file[0] == '/' ? e.file : CorpusDir() + "/" + e.file;
  std::string out = TempPath("malformed_" + std::filesystem::path(in).filename().string());
  Plan plan = plan_in ? *plan_in : PlanFor({in}, Json{{"preset", e.layout}}, out);
  plan.output = out;
  plan.overwrite = true;
  PipelineOptions o;
  o.stages = {};
  o.table = false;
  auto t0 = std::chrono::steady_clock::now();
  auto r = RunPipeline(plan, o, DefaultFileSystem(), stderr);
  double secs = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  EXPECT_LT(secs, 60.0) << e.file << " took too long";  // bounded time (no hang)
  EXPECT_TRUE(r.ok()) << e.file << ": " << r.status().message();
  if (!r.ok()) return {};
  EXPECT_EQ(r.value().entries, e.reasons.size()) << e.file;
  EXPECT_EQ(r.value().blank_lines, e.blank_lines) << e.file;
  EXPECT_EQ(r.value().kept + r.value().rejected, r.value().entries) << e.file;
  auto rejects = ReadJsonl(out + "/rejects.jsonl");
  size_t kept_lines = CountLines(out + "/kept.jsonl");
  EXPECT_EQ(rejects.size() + kept_lines, e.reasons.size()) << e.file;
  EXPECT_EQ(rejects.size(), r.value().rejected) << e.file;
  size_t k = 0;
  for (size_t i = 0; i < e.reasons.size(); ++i) {
    if (e.reasons[i].empty()) continue;
    if (k >= rejects.size()) {
      ADD_FAILURE() << e.file << ": record " << i + 1 << " should be rejected (" << e.reasons[i] << ")";
      break;
    }
    EXPECT_EQ(rejects[k]["reason"], e.reasons[i]) << e.file << " line " << rejects[k]["line"] << ": "
                                                  << rejects[k]["message"];
    EXPECT_FALSE(rejects[k]["message"].get<std::string>().empty());
    EXPECT_EQ(rejects[k]["file"], in);
    ++k;
  }
  auto summary = Json::parse(ReadFile(out + "/summary.json"));
  EXPECT_TRUE(summary["ledger"]["balanced"].get<bool>()) << e.file;
  EXPECT_EQ(summary["ledger"]["records_in"], e.reasons.size()) << e.file;
  return rejects;
}

TEST(MalformedCorpus, TruncatedLastLine) { RunAndCheck({"truncated_last_line.jsonl", "choice", {"", "not_json"}}); }

TEST(MalformedCorpus, CrlfLineEndingsAreAccepted) {
  // The CR before each LF is removed; "\r\n" alone is a blank line.
  RunAndCheck({"crlf.jsonl", "choice", {"", ""}, 1});
}

TEST(MalformedCorpus, ByteOrderMarkOnlyAtFileStart) {
  // A BOM starting the file is removed; one starting a later line is not JSON.
  RunAndCheck({"bom.jsonl", "choice", {"", "not_json"}});
}

TEST(MalformedCorpus, NulBytes) {
  // A raw NUL inside a string, a line of just NUL, a NUL after the object.
  RunAndCheck({"nul_bytes.jsonl", "choice", {"not_json", "not_json", "not_json", ""}});
}

TEST(MalformedCorpus, InvalidUtf8IsRejectedAndCopiedAsBase64) {
  // Overlong 2- and 3-byte forms, U+D800 encoded as ED A0 80, a truncated
  // sequence, a code point above U+10FFFF, a stray byte in a field the layout
  // does not read (the whole line must be UTF-8), then a good record.
  // Unicode 15.0 section 3.9, table 3-7 (well-formed UTF-8 byte sequences) [V].
  auto rejects = RunAndCheck({"invalid_utf8.jsonl", "choice",
                              {"invalid_utf8", "invalid_utf8", "invalid_utf8", "invalid_utf8", "invalid_utf8",
                               "invalid_utf8", ""}});
  for (const auto& r : rejects) {
    EXPECT_TRUE(r.contains("record_base64")) << r.dump();
    EXPECT_FALSE(r.contains("record"));
  }
}

TEST(MalformedCorpus, EscapedLoneSurrogatesAreRejected) {
  // "\ud800" (high surrogate with no low one), "\udc00" (lone low), a high
  // surrogate followed by a non-surrogate escape: RFC 8259 section 8.2 leaves
  // their meaning unpredictable, simdjson refuses them (STRING_ERROR), and we
  // reject the record as not_json with a message that says why. A proper pair
  // (U+1F600) is accepted.
  auto rejects = RunAndCheck({"escaped_surrogates.jsonl", "choice", {"not_json", "not_json", "not_json", ""}});
  for (const auto& r : rejects) {
    EXPECT_NE(r["message"].get<std::string>().find("surrogate"), std::string::npos) << r["message"];
  }
}

TEST(MalformedCorpus, DuplicateKeysOnTheReadPathAreRejected) {
  // Duplicate "prompt", duplicate "choice"; a duplicate in a field the layout
  // does not read is left alone (the record is copied as written).
  RunAndCheck({"duplicate_keys.jsonl", "choice", {"duplicate_key", "duplicate_key", ""}});
}

TEST(MalformedCorpus, WrongTypes) {
  RunAndCheck({"wrong_types.jsonl", "choice",
               {"wrong_type", "wrong_type", "wrong_type", "wrong_type", "wrong_type", "wrong_type", "wrong_type"}});
}

TEST(MalformedCorpus, EmptyAndTooFewCandidates) {
  RunAndCheck({"empty_candidates.jsonl", "choice",
               {"too_few_candidates", "too_few_candidates", "empty_candidate", "empty_candidate", "empty_prompt",
                "missing_field"}});
}

TEST(MalformedCorpus, ChoiceOutOfRange) {
  // -1, B, 2^64-1, -2^63, a number too large for a double (simdjson refuses
  // 1e400 as a bad number: not_json), then a good choice.
  RunAndCheck({"choice_out_of_range.jsonl", "choice",
               {"choice_out_of_range", "choice_out_of_range", "choice_out_of_range", "choice_out_of_range",
                "not_json", ""}});
}

TEST(MalformedCorpus, RankingsWithGaps) {
  // [1,3,4] gap; [0,1,2] no rank 1; too short; [1,1,3] competition ranks ok;
  // [1,1,2] dense ranks ok; [2,2,2] no rank 1; negative; not an integer; huge.
  RunAndCheck({"ranking_gaps.jsonl", "ranked",
               {"bad_ranking", "bad_ranking", "bad_ranking", "", "", "bad_ranking", "bad_ranking", "bad_ranking",
                "bad_ranking"}});
}

TEST(MalformedCorpus, NotObjects) {
  // [1,2], "text", 3, null are JSON but not objects; {} lacks every field; "}" is not JSON.
  RunAndCheck({"not_objects.jsonl", "choice",
               {"not_an_object", "not_an_object", "not_an_object", "not_an_object", "missing_field", "not_json"}});
}

TEST(MalformedCorpus, EmptyFileAndBlankLines) {
  RunAndCheck({"empty.jsonl", "choice", {}});
  RunAndCheck({"blank_lines_only.jsonl", "choice", {}, 4});
}

TEST(MalformedCorpus, DeepNesting) {
  // Thousands of levels: in a field the layout does not read, and as the prompt.
  std::string deep = std::string(5000, '[') + std::string(5000, ']');
  std::string deep_obj;
  for (int i = 0; i < 3000; ++i) deep_obj += "{\"a\":";
  deep_obj += "1" + std::string(3000, '}');
  std::string data = R"({"id":"x1","prompt":"p","candidates":["a","b"],"choice":0,"extra":)" + deep + "}\n" +
                     R"({"id":"x2","prompt":)" + deep_obj + R"(,"candidates":["a","b"],"choice":0})" "\n" +
                     std::string(100000, '[') + "\n" +  // never closed: simdjson sees a bad structure first
                     R"({"id":"x4","prompt":"p","candidates":["a","b"],"choice":0,"ok":[[[[1]]]]})" "\n";
  std::string in = WriteFile("deep.jsonl", data);
  auto rejects = RunAndCheck({in, "choice", {"json_too_deep", "json_too_deep", "not_json", ""}});
  for (const auto& r : rejects) {
    if (r["reason"] != "json_too_deep") continue;
    EXPECT_NE(r["message"].get<std::string>().find("limits.max_depth"), std::string::npos) << r["message"];
  }
}

TEST(MalformedCorpus, ThousandCandidates) {
  std::string c;
  for (int i = 0; i < 1000; ++i) c += std::string(i ? "," : "") + "\"c" + std::to_string(i) + "\"";
  std::string in = WriteFile("b1000.jsonl", R"({"id":"b","prompt":"p","candidates":[)" + c + R"(],"choice":999})" "\n");
  auto rejects = RunAndCheck({in, "choice", {"too_many_candidates"}});
  ASSERT_EQ(rejects.size(), 1u);
  EXPECT_NE(rejects[0]["message"].get<std::string>().find("limits.max_candidates"), std::string::npos);
  // Raised in the plan, the same record is kept.
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, "");
  plan.limits.max_candidates = 1000;
  RunAndCheck({in, "choice", {""}}, &plan);
}

TEST(MalformedCorpus, LinesOfManyMegabytes) {
  // A 5 MiB prompt: a readable line, but a text over limits.max_text_bytes
  // (4 MiB). A 70 MiB line: over limits.max_line_bytes (64 MiB), skipped
  // without being buffered and not copied into rejects.jsonl.
  std::string in = TempPath("long_lines.jsonl");
  {
    std::ofstream f(in, std::ios::binary);
    f << R"({"id":"big","prompt":")" << std::string(5u << 20, 'x') << R"(","candidates":["a","b"],"choice":0})" "\n";
    f << R"({"id":"huge","prompt":")" << std::string(70u << 20, 'y') << R"(","candidates":["a","b"],"choice":0})" "\n";
    f << R"({"id":"ok","prompt":"p","candidates":["a","b"],"choice":0})" "\n";
  }
  auto rejects = RunAndCheck({in, "choice", {"text_too_long", "line_too_long", ""}});
  ASSERT_EQ(rejects.size(), 2u);
  EXPECT_NE(rejects[0]["message"].get<std::string>().find("limits.max_text_bytes"), std::string::npos);
  EXPECT_NE(rejects[1]["message"].get<std::string>().find("limits.max_line_bytes"), std::string::npos)
      << rejects[1]["message"];
  EXPECT_TRUE(rejects[1].contains("record_omitted"));
  EXPECT_LT(rejects[1].dump().size(), 4096u);
  std::filesystem::remove(in);
}

// Inputs that cannot be read at all: an input error naming the file, and no output.
void ExpectInputError(const Plan& plan, FileSystem* fs, const std::string& path, const std::string& words) {
  std::filesystem::remove_all(plan.output);
  PipelineOptions o;
  o.stages = {};
  o.table = false;
  auto r = RunPipeline(plan, o, fs, stderr);
  ASSERT_FALSE(r.ok()) << path;
  EXPECT_EQ(r.status().code(), StatusCode::kInput) << r.status().message();
  EXPECT_NE(r.status().message().find(path), std::string::npos) << r.status().message();
  EXPECT_NE(r.status().message().find(words), std::string::npos) << r.status().message();
  EXPECT_FALSE(std::filesystem::exists(plan.output));
}

TEST(MalformedCorpus, DirectoryGivenAsFile) {
  std::string dir = TempPath("a_directory.jsonl");
  std::filesystem::create_directories(dir);
  ExpectInputError(PlanFor({dir}, Json{{"preset", "choice"}}, TempPath("dir_out")), DefaultFileSystem(), dir,
                   "directory");
}

TEST(MalformedCorpus, MissingFile) {
  std::string path = TempPath("no_such_file.jsonl");
  std::filesystem::remove(path);
  ExpectInputError(PlanFor({path}, Json{{"preset", "choice"}}, TempPath("missing_out")), DefaultFileSystem(), path,
                   "cannot open");
}

TEST(MalformedCorpus, UnreadableFile) {
  std::string path = WriteFile("unreadable.jsonl", R"({"id":"a","prompt":"p","candidates":["a","b"],"choice":0})" "\n");
  ::chmod(path.c_str(), 0);
  bool readable_anyway = ::access(path.c_str(), R_OK) == 0;  // root (as in CI) ignores mode bits
  Plan plan = PlanFor({path}, Json{{"preset", "choice"}}, TempPath("unreadable_out"));
  if (!readable_anyway) {
    ExpectInputError(plan, DefaultFileSystem(), path, "ermission denied");
  }
  // Always also through the fault-injecting file system, so the path is
  // tested when running as root too.
  FaultFileSystem fs(DefaultFileSystem());
  fs.fail_open_path = path;
  ExpectInputError(plan, &fs, path, "ermission denied");
  ::chmod(path.c_str(), 0644);
}

TEST(MalformedCorpus, CorruptCompressedInput) {
  // A gzip stream cut short, and gzip magic followed by garbage.
  for (const char* f : {"truncated.jsonl.gz", "not_gzip_after_magic.jsonl.gz"}) {
    std::string path = CorpusDir() + "/" + f;
    ExpectInputError(PlanFor({path}, Json{{"preset", "choice"}}, TempPath("gz_out")), DefaultFileSystem(), path,
                     "gzip");
  }
}

TEST(MalformedCorpus, ReadErrorMidFileLeavesNoOutput) {
  std::string path = CorpusDir() + "/crlf.jsonl";
  Plan plan = PlanFor({path}, Json{{"preset", "choice"}}, TempPath("eio_out"));
  std::filesystem::remove_all(plan.output);
  FaultFileSystem fs(DefaultFileSystem());
  fs.fail_reads_after = 10;
  PipelineOptions o;
  o.table = false;
  auto r = RunPipeline(plan, o, &fs, stderr);
  ASSERT_FALSE(r.ok());
  EXPECT_EQ(r.status().code(), StatusCode::kInput);
  EXPECT_FALSE(std::filesystem::exists(plan.output));
}

TEST(MalformedCorpus, FailedRunKeepsAnExistingOutputAsItWas) {
  // --overwrite asked, but the run fails on a full disk: the old folder stays
  // untouched and no staging folder is left beside it.
  std::string in = CorpusDir() + "/crlf.jsonl";
  std::string out = TempPath("keep_old_out");
  std::filesystem::remove_all(out);
  std::filesystem::create_directories(out);
  WriteFile("keep_old_out/kept.jsonl", "old\n");
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
  plan.overwrite = true;
  FaultFileSystem fs(DefaultFileSystem());
  fs.fail_writes_after = 50;
  PipelineOptions o;
  o.table = false;
  auto r = RunPipeline(plan, o, &fs, stderr);
  ASSERT_FALSE(r.ok());
  EXPECT_EQ(ReadFile(out + "/kept.jsonl"), "old\n");
  for (const auto& entry : std::filesystem::directory_iterator(std::filesystem::path(out).parent_path())) {
    EXPECT_EQ(entry.path().filename().string().find("keep_old_out.partial"), std::string::npos) << entry.path();
  }
}

}  // namespace
}  // namespace prefsift
