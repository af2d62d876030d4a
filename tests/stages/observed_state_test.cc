// Observed state in parts (issue 15, item 8): observing the parts of the
// inputs one by one, saving each part's state file, merging the files in
// order and deciding gives exactly the decisions and summary sections of
// observing the whole inputs at once. Damaged state files are refused.
#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include <algorithm>
#include <filesystem>

#include "core/plan.h"
#include "core/random.h"
#include "core/state_file.h"
#include "io/line_reader.h"
#include "pipeline/observed_state.h"
#include "pipeline/parts.h"
#include "parts_helpers.h"
#include "run_helpers.h"
#include "stages/stage.h"

namespace prefsift {
namespace {

using namespace prefsift::testing;  // NOLINT
using Json = nlohmann::ordered_json;

// Everything the decide step produced, as text: one line per entry and one
// JSON object per stage's summary section, plus the line figures.
struct Decided {
  std::vector<std::string> entries;
  Json sections = Json::object();
  Json inputs = Json::array();
  Json rejects_by_stage = Json::array();
};

Decided Collect(const ObservedRun& run) {
  const RunState& st = run.state();
  Decided out;
  for (size_t i = 0; i < st.entries.size(); ++i) {
    const Entry& e = st.entries[i];
    const Decision& d = st.decisions[i];
    const RejectText& t = st.RejectTextOf(d);
    Json j{{"input", e.input}, {"line", e.line}, {"record", e.record}, {"rejected", d.rejected},
           {"stage", st.StageOf(d)}, {"reason", st.ReasonOf(d)}, {"split", d.rejected ? "" : st.split_names[d.split]},
           {"field", t.field}, {"message", t.message}, {"detail", t.detail}, {"id", t.id}};
    if (e.record >= 0) j["record_id"] = st.records[static_cast<size_t>(e.record)].id;
    out.entries.push_back(j.dump());
  }
  for (const auto& stage : run.stages()) {
    Json sec = Json::object();
    stage->Report(st, &sec);
    out.sections[stage->name()] = std::move(sec);
  }
  for (const auto& in : st.inputs) {
    out.inputs.push_back(Json{{"lines", in.lines}, {"blank", in.blank_lines}, {"entries", in.entries},
                              {"records", in.records}, {"compression", in.compression}});
  }
  for (const auto& [stage, reasons] : st.rejects_by_stage()) out.rejects_by_stage.push_back(Json{{stage, reasons}});
  return out;
}

Decided DecideWhole(const Plan& plan) {
  auto run = ObservedRun::Start(plan, AllStageNames(), DefaultFileSystem());
  EXPECT_TRUE(run.ok()) << run.status().message();
  Status s = run.value()->ObserveAll(DefaultFileSystem());
  EXPECT_TRUE(s.ok()) << s.message();
  s = run.value()->Decide();
  EXPECT_TRUE(s.ok()) << s.message();
  return Collect(*run.value());
}

// Observes each part in a run of its own, saves its state file, then merges
// the files into a fresh run and decides.
Decided DecideInParts(const Plan& plan, const std::vector<Part>& parts, const std::string& tag) {
  std::vector<std::string> files;
  for (const Part& p : parts) {
    auto run = ObservedRun::Start(plan, AllStageNames(), DefaultFileSystem());
    EXPECT_TRUE(run.ok()) << run.status().message();
    Status s = run.value()->ObservePart(p, DefaultFileSystem());
    EXPECT_TRUE(s.ok()) << s.message();
    files.push_back(TempPath(tag + "_part" + std::to_string(p.part) + ".state"));
    s = run.value()->Save(files.back(), DefaultFileSystem());
    EXPECT_TRUE(s.ok()) << s.message();
  }
  auto merged = ObservedRun::Start(plan, AllStageNames(), DefaultFileSystem());
  EXPECT_TRUE(merged.ok()) << merged.status().message();
  for (const auto& f : files) {
    Status s = merged.value()->Append(f, DefaultFileSystem());
    EXPECT_TRUE(s.ok()) << s.message();
  }
  Status s = merged.value()->CheckInputs();
  EXPECT_TRUE(s.ok()) << s.message();
  s = merged.value()->Decide();
  EXPECT_TRUE(s.ok()) << s.message();
  return Collect(*merged.value());
}

void ExpectSame(const Decided& whole, const Decided& parts) {
  ASSERT_EQ(whole.entries.size(), parts.entries.size());
  for (size_t i = 0; i < whole.entries.size(); ++i) EXPECT_EQ(whole.entries[i], parts.entries[i]) << "entry " << i;
  EXPECT_EQ(whole.inputs, parts.inputs);
  EXPECT_EQ(whole.rejects_by_stage, parts.rejects_by_stage);
  for (auto it = whole.sections.begin(); it != whole.sections.end(); ++it) {
    EXPECT_EQ(it.value().dump(1), parts.sections[it.key()].dump(1)) << "stage " << it.key();
  }
}

TEST(ObservedState, GeneratedInputInHalvesDecidesAsTheWhole) {
  Generated g = MakeQuaysideInput(20260415, 900);
  Plan plan = QuaysidePlan(g);
  Decided whole = DecideWhole(plan);
  ASSERT_GT(whole.entries.size(), 900u);
  // The generator planted every kind of decision the comparison must cover.
  const std::string all = Json(whole.entries).dump();
  for (const char* reason : {"not_json", "duplicate_comparison", "near_duplicate_over_cap", "eval_leak_exact",
                             "near_identical_candidates"}) {
    EXPECT_NE(all.find(reason), std::string::npos) << reason;
  }
  EXPECT_GT(whole.sections["screen"]["findings"].get<uint64_t>(), 0u);
  ExpectSame(whole, DecideInParts(plan, CutAt(plan, {0.5}), "quayside2"));
}

// The near stage's key sketches (template text set aside): with
// template_min_prompts 2 every key held by two prompts is set aside, so the
// candidates come from the key sketches and the sorted neighbourhoods. The
// decisions of three parts, merged, and of any thread count equal the whole.
TEST(ObservedState, NearKeySketchesInPartsDecideAsTheWhole) {
  Generated g = MakeQuaysideInput(20261203, 700);
  Plan plan = QuaysidePlan(g);
  plan.stages["near"]["template_min_prompts"] = 2;
  plan.threads = 1;
  Decided whole = DecideWhole(plan);
  ASSERT_TRUE(whole.sections["near"].contains("template_text")) << whole.sections["near"].dump();
  EXPECT_GT(whole.sections["near"]["template_text"]["keys_set_aside"].get<uint64_t>(), 0u);
  EXPECT_GT(whole.sections["near"]["clusters"].get<uint64_t>(), 0u);
  ExpectSame(whole, DecideInParts(plan, CutAt(plan, {0.3, 0.7}), "quayside_keys3"));
  plan.threads = 3;
  ExpectSame(whole, DecideWhole(plan));
  ExpectSame(whole, DecideInParts(plan, CutAt(plan, {0.5}), "quayside_keys2"));
}

TEST(ObservedState, PartsWithAnEmptyOneDecideAsTheWhole) {
  Generated g = MakeQuaysideInput(20260416, 500);
  Plan plan = QuaysidePlan(g);
  Decided whole = DecideWhole(plan);
  // Five parts: the third holds no lines (two cuts at the same line).
  std::vector<Part> parts = CutAt(plan, {0.2, 0.45, 0.45, 0.8});
  ASSERT_EQ(parts.size(), 5u);
  ASSERT_EQ(parts[2].begin, *parts[2].end);
  ExpectSame(whole, DecideInParts(plan, parts, "quayside5"));
  // A whole file is one part with no end.
  ExpectSame(whole, DecideInParts(plan, WholeInputParts(plan), "quayside1"));
}

TEST(ObservedState, SamplesInHalvesDecideAsTheWhole) {
  auto loaded = LoadPlanFile(DefaultFileSystem(), std::string(PREFSIFT_TEST_SOURCE_DIR) + "/samples/demo-plan.json");
  ASSERT_TRUE(loaded.ok()) << loaded.status().message();
  const Plan& plan = loaded.value();
  Decided whole = DecideWhole(plan);
  ExpectSame(whole, DecideInParts(plan, CutAt(plan, {0.5}), "samples2"));
}

class ObservedStateFiles : public ::testing::Test {
 protected:
  void SetUp() override {
    g_ = MakeQuaysideInput(5, 60);
    plan_ = QuaysidePlan(g_);
    parts_ = CutAt(plan_, {0.5});
    for (const Part& p : parts_) {
      auto run = ObservedRun::Start(plan_, AllStageNames(), DefaultFileSystem());
      ASSERT_TRUE(run.ok());
      ASSERT_TRUE(run.value()->ObservePart(p, DefaultFileSystem()).ok());
      auto bytes = run.value()->SaveToBytes();
      ASSERT_TRUE(bytes.ok());
      bytes_.push_back(bytes.value());
    }
  }
  // Merging part 0 as given, then part 1: the status of the first failure.
  Status Merge(const std::string& first, const std::string& second = "") {
    auto run = ObservedRun::Start(plan_, AllStageNames(), DefaultFileSystem());
    if (!run.ok()) return run.status();
    Status s = run.value()->AppendBytes(first, "part0.state");
    if (s.ok()) s = run.value()->AppendBytes(second.empty() ? bytes_[1] : second, "part1.state");
    if (s.ok()) s = run.value()->CheckInputs();
    return s;
  }
  Generated g_;
  Plan plan_;
  std::vector<Part> parts_;
  std::vector<std::string> bytes_;
};

TEST_F(ObservedStateFiles, GoodFilesMerge) { EXPECT_TRUE(Merge(bytes_[0]).ok()); }

TEST_F(ObservedStateFiles, AChangedByteIsRefused) {
  std::string bad = bytes_[0];
  bad[bad.size() / 2] ^= 0x20;
  Status s = Merge(bad);
  ASSERT_FALSE(s.ok());
  EXPECT_NE(s.message().find("part0.state"), std::string::npos) << s.message();
  EXPECT_NE(s.message().find("checksum"), std::string::npos) << s.message();
}

TEST_F(ObservedStateFiles, ATruncatedFileIsRefused) {
  for (size_t keep : {size_t{0}, size_t{5}, size_t{30}, bytes_[0].size() / 2, bytes_[0].size() - 1}) {
    Status s = Merge(bytes_[0].substr(0, keep));
    ASSERT_FALSE(s.ok()) << keep;
    EXPECT_NE(s.message().find("part0.state"), std::string::npos) << s.message();
  }
}

TEST_F(ObservedStateFiles, AnotherVersionIsRefused) {
  std::string other = bytes_[0];
  other[8] = 9;  // the format version's low byte
  Status s = Merge(other);
  ASSERT_FALSE(s.ok());
  EXPECT_NE(s.message().find("format version 9"), std::string::npos) << s.message();
  EXPECT_NE(s.message().find("part0.state"), std::string::npos) << s.message();
}

TEST_F(ObservedStateFiles, NotAStateFileIsRefused) {
  Status s = Merge("{\"id\":\"q1\"}\n");
  ASSERT_FALSE(s.ok());
  EXPECT_NE(s.message().find("not a prefsift state file"), std::string::npos) << s.message();
}

TEST_F(ObservedStateFiles, PartsOutOfOrderOrMissingAreRefused) {
  Status s = Merge(bytes_[1], bytes_[0]);
  ASSERT_FALSE(s.ok());
  EXPECT_NE(s.message().find("first state file"), std::string::npos) << s.message();
  auto run = ObservedRun::Start(plan_, AllStageNames(), DefaultFileSystem());
  ASSERT_TRUE(run.ok());
  ASSERT_TRUE(run.value()->AppendBytes(bytes_[0], "part0.state").ok());
  s = run.value()->CheckInputs();
  ASSERT_FALSE(s.ok());
  EXPECT_NE(s.message().find("missing"), std::string::npos) << s.message();
}

TEST_F(ObservedStateFiles, AnotherPlanIsRefused) {
  Plan other = plan_;
  other.stages["near"]["threshold"] = 0.9;
  auto run = ObservedRun::Start(other, AllStageNames(), DefaultFileSystem());
  ASSERT_TRUE(run.ok());
  Status s = run.value()->AppendBytes(bytes_[0], "part0.state");
  ASSERT_FALSE(s.ok());
  EXPECT_NE(s.message().find("another plan"), std::string::npos) << s.message();
}

TEST(StateFile, SectionsRoundTripAndOverrunsAreCaught) {
  StateWriter w;
  w.BeginSection("a");
  w.U32(7);
  w.Str("kale");
  w.Vec(std::vector<uint64_t>{1, 2, 3});
  w.EndSection();
  w.BeginSection("b");
  w.F64(0.25);
  w.EndSection();
  auto r = StateReader::Open(w.Finish("test"), "test", "x.state");
  ASSERT_TRUE(r.ok()) << r.status().message();
  ASSERT_TRUE(r.value().EnterSection("b"));
  EXPECT_EQ(r.value().F64(), 0.25);
  EXPECT_TRUE(r.value().LeaveSection().ok());
  ASSERT_TRUE(r.value().EnterSection("a"));
  EXPECT_EQ(r.value().U32(), 7u);
  EXPECT_EQ(r.value().Str(), "kale");
  std::vector<uint64_t> v;
  r.value().Vec(&v);
  EXPECT_EQ(v, (std::vector<uint64_t>{1, 2, 3}));
  EXPECT_EQ(r.value().U8(), 0);  // past the end
  Status s = r.value().LeaveSection();
  ASSERT_FALSE(s.ok());
  EXPECT_NE(s.message().find("x.state"), std::string::npos);
  EXPECT_FALSE(r.value().EnterSection("c"));
  EXPECT_FALSE(StateReader::Open(StateWriter().Finish("test"), "other", "y.state").ok());
}

TEST(LineRange, APartReadsTheLinesThatStartInIt) {
  std::string path = WriteFile("range.jsonl", "\xEF\xBB\xBF" "a\nbb\r\n\nccc\ndddd");
  auto read = [&](LineRange r) {
    std::vector<std::string> got;
    auto lr = LineReader::Open(DefaultFileSystem(), path, 100, r);
    EXPECT_TRUE(lr.ok()) << lr.status().message();
    if (!lr.ok()) return got;
    std::string_view line;
    uint64_t no = 0;
    while (lr.value()->Read(&line, &no).value() == LineReader::Next::kLine) {
      got.push_back(std::to_string(no) + ":" + std::string(line));
    }
    got.push_back(lr.value()->at_file_end() ? "end" : "more");
    return got;
  };
  using V = std::vector<std::string>;
  EXPECT_EQ(read(LineRange{}), (V{"1:a", "2:bb", "3:", "4:ccc", "5:dddd", "end"}));
  // Line starts: 0 (after the BOM: "a"), 5, 9, 10, 14; the file is 18 bytes. A
  // line that starts before `end` is read whole.
  EXPECT_EQ(read(LineRange{0, 4, 1}), (V{"1:a", "more"}));
  EXPECT_EQ(read(LineRange{0, 5, 1}), (V{"1:a", "more"}));
  EXPECT_EQ(read(LineRange{0, 6, 1}), (V{"1:a", "2:bb", "more"}));
  EXPECT_EQ(read(LineRange{5, 11, 2}), (V{"2:bb", "3:", "4:ccc", "more"}));
  EXPECT_EQ(read(LineRange{14, 14, 5}), (V{"more"}));
  EXPECT_EQ(read(LineRange{14, UINT64_MAX, 5}), (V{"5:dddd", "end"}));
  EXPECT_EQ(read(LineRange{18, UINT64_MAX, 6}), (V{"end"}));
  EXPECT_EQ(read(LineRange{14, 18, 5}), (V{"5:dddd", "end"}));
  // Not at a line start.
  auto mid = LineReader::Open(DefaultFileSystem(), path, 100, LineRange{6, UINT64_MAX, 2});
  ASSERT_FALSE(mid.ok());
  EXPECT_NE(mid.status().message().find("line start"), std::string::npos);
}

TEST(Parts, JsonRoundTripsAndBadCutsAreRefused) {
  std::vector<Part> parts(3);
  parts[0].path = parts[1].path = "a.jsonl";
  parts[0].end = 100;
  parts[1].part = 1;
  parts[1].begin = 100;
  parts[1].first_line = 9;
  parts[2].part = 2;
  parts[2].input = 1;
  parts[2].path = "b.jsonl.gz";
  auto back = ParsePartsJson(PartsJson(parts), "parts.json", nullptr);
  ASSERT_TRUE(back.ok()) << back.status().message();
  ASSERT_EQ(back.value().size(), 3u);
  EXPECT_EQ(back.value()[1].begin, 100u);
  EXPECT_EQ(back.value()[1].first_line, 9u);
  EXPECT_FALSE(back.value()[1].end.has_value());
  EXPECT_EQ(*back.value()[0].end, 100u);
  parts[1].begin = 99;  // a gap
  auto gap = ParsePartsJson(PartsJson(parts), "parts.json", nullptr);
  ASSERT_FALSE(gap.ok());
  EXPECT_NE(gap.status().message().find("parts.json: /parts/1/begin"), std::string::npos) << gap.status().message();
  auto wrong = ParsePartsJson("{\"format\":\"prefsift-parts\",\"version\":2,\"parts\":[]}", "p.json", nullptr);
  ASSERT_FALSE(wrong.ok());
  EXPECT_NE(wrong.status().message().find("version"), std::string::npos);
}

}  // namespace
}  // namespace prefsift
