#include <gtest/gtest.h>

#include <filesystem>

#include "fault_fs.h"
#include "run_helpers.h"

namespace prefsift {
namespace {

using namespace prefsift::testing;  // NOLINT
using Json = nlohmann::ordered_json;

// A malformed corpus: each line must end in rejects.jsonl with this reason,
// and the ledger must balance (issue: input = kept + rejected, always).
TEST(Pipeline, MalformedCorpusBalancesTheLedger) {
  std::string lines;
  std::vector<std::string> expected;
  auto add = [&](const std::string& line, const std::string& reason) {
    lines += line + "\n";
    expected.push_back(reason);
  };
  add(R"({"id":"ok1","prompt":"p","candidates":["a","b"],"choice":0,"keep":{"me":[1,{"x":null}]}})", "");
  add(R"({"id":"t","prompt":"p","candidates":["a","b"],"choi)", "not_json");
  add("{\"id\":\"u\",\"prompt\":\"\xED\xA0\x80\",\"candidates\":[\"a\",\"b\"],\"choice\":0}", "invalid_utf8");
  add(std::string("{\"id\":\"n\",\"prompt\":\"a") + '\0' + "b\",\"candidates\":[\"a\",\"b\"],\"choice\":0}", "not_json");
  add(R"({"id":"m","candidates":["a","b"],"choice":0})", "missing_field");
  add(R"({"id":"w","prompt":12,"candidates":["a","b"],"choice":0})", "wrong_type");
  add(R"({"id":"e","prompt":"p","candidates":["",""],"choice":0})", "empty_candidate");
  add(R"({"id":"r","prompt":"p","candidates":["a","b"],"choice":-1})", "choice_out_of_range");
  add(R"("just a string")", "not_an_object");
  add(std::string(R"({"id":"deep","prompt":"p","candidates":["a","b"],"choice":0,"x":)") + std::string(3000, '[') +
          std::string(3000, ']') + "}",
      "json_too_deep");
  std::string big_candidates = "[";
  for (int i = 0; i < 1000; ++i) big_candidates += std::string(i ? "," : "") + "\"c" + std::to_string(i) + "\"";
  add(R"({"id":"b1000","prompt":"p","candidates":)" + big_candidates + R"(],"choice":0})", "too_many_candidates");
  add(R"({"id":"ok2","prompt":"q","candidates":["a","b"],"choice":1})", "");
  lines += "\r\n   \n";  // blank lines are not records
  lines += R"({"id":"last","prompt":"p","candidates":["a","b"],"choice":0)";  // truncated last line, no LF
  expected.push_back("not_json");

  std::string in = WriteFile("malformed.jsonl", lines);
  std::string out = TempPath("malformed_out");
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
  PipelineOptions o;
  o.stages = {"exact"};
  o.table = false;
  auto r = RunPipeline(plan, o, DefaultFileSystem(), stderr);
  ASSERT_TRUE(r.ok()) << r.status().message();
  EXPECT_EQ(r.value().entries, expected.size());
  EXPECT_EQ(r.value().blank_lines, 2u);
  auto rejects = ReadJsonl(out + "/rejects.jsonl");
  auto kept = ReadJsonl(out + "/kept.jsonl");
  EXPECT_EQ(rejects.size() + kept.size(), expected.size());
  size_t k = 0;
  for (size_t i = 0; i < expected.size(); ++i) {
    if (expected[i].empty()) continue;
    ASSERT_LT(k, rejects.size());
    EXPECT_EQ(rejects[k]["reason"], expected[i]) << "line " << rejects[k]["line"];
    EXPECT_EQ(rejects[k]["file"], in);
    ++k;
  }
  // The kept record is byte-identical to its input line (unknown fields untouched).
  EXPECT_EQ(ReadFile(out + "/kept.jsonl").substr(0, ReadFile(in).find('\n') + 1), ReadFile(in).substr(0, ReadFile(in).find('\n') + 1));
  auto summary = Json::parse(ReadFile(out + "/summary.json"));
  EXPECT_TRUE(summary["ledger"]["balanced"].get<bool>());
  EXPECT_EQ(summary["ledger"]["records_in"], expected.size());
}

TEST(Pipeline, UnusualLayoutRoundTripsUnknownFields) {
  // Prompt as chat turns, candidates as objects under another name, a ranking.
  std::string line =
      R"({"key":"rc-1","turns":[{"role":"system","content":"Be brief."},{"role":"user","content":"When to sow kale?"}],)"
      R"("answers":[{"body":"March","meta":{"model":"m1","score":0.25}},{"body":"Never"},{"body":"April"}],)"
      R"("ranks":[1,3,2],"unknown":{"deep":[1,2,{"z":"\u00e9"}],"n":1.50}})";
  std::string in = WriteFile("unusual.jsonl", line + "\n");
  std::string out = TempPath("unusual_out");
  Plan plan = PlanFor({in}, Json{{"id", "/key"}, {"prompt", "/turns"}, {"candidates", "/answers"},
                                 {"candidate_text", "/body"}, {"ranks", "/ranks"}}, out);
  PipelineOptions o;
  o.stages = {"exact"};
  o.table = false;
  ASSERT_TRUE(RunPipeline(plan, o, DefaultFileSystem(), stderr).ok());
  EXPECT_EQ(ReadFile(out + "/kept.jsonl"), line + "\n");
}

TEST(Pipeline, FailedWriteLeavesNoOutput) {
  std::string data;
  for (int i = 0; i < 2000; ++i) {
    data += R"({"id":")" + std::to_string(i) + R"(","prompt":"p)" + std::to_string(i) + R"(","candidates":["a","b"],"choice":0})" "\n";
  }
  std::string in = WriteFile("disk_full.jsonl", data);
  std::string out = TempPath("disk_full_out");
  std::filesystem::remove_all(out);
  FaultFileSystem fs(DefaultFileSystem());
  fs.fail_writes_after = 10000;
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
  PipelineOptions o;
  o.table = false;
  auto r = RunPipeline(plan, o, &fs, stderr);
  ASSERT_FALSE(r.ok());
  EXPECT_NE(r.status().message().find("No space"), std::string::npos);
  EXPECT_FALSE(std::filesystem::exists(out));
  FaultFileSystem rfs(DefaultFileSystem());
  rfs.fail_reads_after = 100;
  auto r2 = RunPipeline(plan, o, &rfs, stderr);
  ASSERT_FALSE(r2.ok());
  EXPECT_FALSE(std::filesystem::exists(out));
}

TEST(Pipeline, ThreadCountDoesNotChangeOutputs) {
  // The reproducible mode: without it the provenance holds the wall-clock
  // start and duration (docs/datasheet.md).
  ::setenv("SOURCE_DATE_EPOCH", "1775000000", 1);
  std::string data;
  for (int i = 0; i < 20000; ++i) {
    int p = i % 7000;
    data += R"({"id":"r)" + std::to_string(i) + R"(","prompt":"prompt )" + std::to_string(p) +
            R"(","candidates":["a )" + std::to_string(i % 3) + R"(","b"],"choice":)" + std::to_string(i % 2) + "}\n";
  }
  std::string in = WriteFile("threads.jsonl", data);
  std::string outs[2];
  for (int t = 0; t < 2; ++t) {
    outs[t] = TempPath("threads_out" + std::to_string(t));
    Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, outs[t]);
    plan.threads = t == 0 ? 1 : 4;
    PipelineOptions o;
    o.stages = {"exact"};
    o.table = false;
    ASSERT_TRUE(RunPipeline(plan, o, DefaultFileSystem(), stderr).ok());
  }
  for (const char* f : {"/kept.jsonl", "/rejects.jsonl", "/summary.json", "/conflicts.jsonl"}) {
    EXPECT_EQ(ReadFile(outs[0] + f), ReadFile(outs[1] + f)) << f;
  }
  ::unsetenv("SOURCE_DATE_EPOCH");
}

// Pass 1 numbers a chunk of 256 lines on one worker while the next chunk is
// parsed, and observes it once numbered (pipeline.cc, "round"). Records in
// many chunks, two inputs, rejects on both sides of chunk borders and
// annotators first seen late (their ids are given in input order) must give
// the same bytes on any number of threads, with --timings (its own loop) or
// without.
TEST(Pipeline, ChunksNumberedBesideParsingKeepInputOrder) {
  ::setenv("SOURCE_DATE_EPOCH", "1775000000", 1);
  auto lines = [](int n, int salt) {
    std::string data;
    for (int i = 0; i < n; ++i) {
      const std::string id = "\"id\":\"r" + std::to_string(salt) + "-" + std::to_string(i) + "\"";
      if (i % 97 == 5 || i == 255 || i == 256 || i == 511 || i == 768) {
        data += "{" + id + ",\"candidates\":[\"a\",\"b\"],\"choice\":0}\n";  // missing_field
      } else if (i % 131 == 7) {
        data += "{" + id + ",\"prompt\":\"p\",\"candidates\":[\"a\",\"b\"],\"choi\n";  // not_json
      } else {
        data += "{" + id + ",\"prompt\":\"prompt " + std::to_string((i * 7 + salt) % 400) +
                "\",\"candidates\":[\"a " + std::to_string(i % 5) + "\",\"b\"],\"choice\":" +
                std::to_string(i % 2) + ",\"who\":\"annotator " + std::to_string((i * i + salt) % (5 + i / 50)) +
                "\"}\n";
      }
    }
    return data;
  };
  const std::string in1 = WriteFile("chunks1.jsonl", lines(700, 1)), in2 = WriteFile("chunks2.jsonl", lines(1300, 2));
  std::vector<std::string> outs;
  for (unsigned threads : {1u, 2u, 3u, 8u}) {
    for (bool timings : {false, true}) {
      outs.push_back(TempPath("chunks_out" + std::to_string(threads) + (timings ? "t" : "")));
      Plan plan = PlanFor({in1, in2}, Json{{"preset", "choice"}, {"annotator", "/who"}}, outs.back());
      plan.threads = threads;
      PipelineOptions o;
      o.stages = {"annotators", "exact", "near", "split"};
      o.table = false;
      o.timings = timings;
      std::FILE* log = std::tmpfile();
      ASSERT_TRUE(RunPipeline(plan, o, DefaultFileSystem(), log).ok()) << threads;
      std::fclose(log);
    }
  }
  const std::string rejects = ReadFile(outs[0] + "/rejects.jsonl");
  // 2,000 lines; every reject once, in input order: first chunk's then later ones'.
  EXPECT_NE(rejects.find("r1-5\""), std::string::npos);
  EXPECT_LT(rejects.find("r1-255\""), rejects.find("r1-256\""));
  EXPECT_LT(rejects.find("r1-511\""), rejects.find("r2-5\""));
  EXPECT_LT(rejects.find("r2-5\""), rejects.find("r2-768\""));
  EXPECT_NE(rejects.find("r2-1266\""), std::string::npos);  // 1266 % 97 == 5: in the last chunk
  for (size_t k = 1; k < outs.size(); ++k) {
    for (const char* f : {"/train.jsonl", "/test.jsonl", "/rejects.jsonl", "/summary.json", "/annotators.json"}) {
      if (!std::filesystem::exists(outs[0] + f)) continue;
      EXPECT_EQ(ReadFile(outs[0] + f), ReadFile(outs[k] + f)) << outs[k] << f;
    }
  }
  ::unsetenv("SOURCE_DATE_EPOCH");
}

// The layout check names the first line of a reason and that line's keys,
// read from the chunk's lines while a later chunk is already being read: a
// first bad line in the second chunk must still be named right.
TEST(Pipeline, LayoutSuspectNamesTheFirstBadLineOfALaterChunk) {
  std::string data;
  for (int i = 0; i < 1000; ++i) {
    if (i < 300) {
      data += R"({"id":"g)" + std::to_string(i) + R"(","prompt":"p )" + std::to_string(i) +
              R"(","candidates":["a","b"],"choice":0})" "\n";
    } else {
      data += R"({"id":"q)" + std::to_string(i) + R"(","question":"p","candidates":["a","b"],"choice":0})" "\n";
    }
  }
  const std::string in = WriteFile("suspect_late.jsonl", data);
  for (unsigned threads : {1u, 2u, 4u}) {
    Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, TempPath("suspect_late_out"));
    plan.threads = threads;
    PipelineOptions o;
    o.stages = {"exact"};
    o.table = false;
    auto r = RunPipeline(plan, o, DefaultFileSystem(), stderr);
    ASSERT_FALSE(r.ok()) << threads;
    EXPECT_NE(r.status().message().find(R"((line 301) has the keys: "id", "question", "candidates", "choice")"), std::string::npos)
        << r.status().message();
  }
}

TEST(Pipeline, ExistingOutputNotOverwrittenUnasked) {
  std::string in = WriteFile("exists.jsonl", R"({"id":"a","prompt":"p","candidates":["a","b"],"choice":0})" "\n");
  std::string out = TempPath("exists_out");
  std::filesystem::create_directories(out);
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
  plan.overwrite = false;
  PipelineOptions o;
  o.table = false;
  auto r = RunPipeline(plan, o, DefaultFileSystem(), stderr);
  ASSERT_FALSE(r.ok());
  EXPECT_EQ(r.status().code(), StatusCode::kUsage);
}

}  // namespace
}  // namespace prefsift
