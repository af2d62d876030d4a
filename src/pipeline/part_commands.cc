#include "pipeline/part_commands.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <chrono>

#include "core/state_file.h"
#include "io/output_dir.h"
#include "pipeline/observed_state.h"
#include "pipeline/passes.h"
#include "pipeline/finish.h"
#include "report/summary.h"
#include "stages/screen/screen_stage.h"
#include "stages/stage.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;
constexpr const char* kKind = "decisions";

std::string StageSection(const std::string& name) { return "stage " + name; }

std::string Describe(const Part& p) {
  return "part " + std::to_string(p.part) + " (input " + std::to_string(p.input) + ", bytes " +
         std::to_string(p.begin) + " to " + (p.end ? std::to_string(*p.end) : std::string("the end")) + ", line " +
         std::to_string(p.first_line) + ")";
}

// One part's decision file: its entries' decisions and each stage's rewrites.
std::string DecisionBytes(const Plan& plan, const ObservedRun& run, const MergedPart& mp) {
  const RunState& st = run.state();
  StateWriter w;
  w.BeginSection("run");
  w.Str(ObservationFingerprint(plan, run.stage_names()));
  WritePart(w, mp.part);
  w.EndSection();
  w.BeginSection("splits");
  w.U64(st.split_names.size());
  for (const auto& s : st.split_names) w.Str(s);
  w.EndSection();
  w.BeginSection("entries");
  w.U64(mp.entries);
  for (size_t i = mp.first_entry; i < mp.first_entry + mp.entries; ++i) {
    const Entry& e = st.entries[i];
    const Decision& d = st.decisions[i];
    w.U64(e.line);
    w.I64(e.record >= 0 ? e.record - static_cast<int64_t>(mp.first_record) : -1);
    w.U8(d.rejected);
    if (d.rejected) {
      WriteReject(w, st, d);
    } else {
      w.U32(d.split);
    }
    if (e.record >= 0) w.Str(st.records[static_cast<size_t>(e.record)].id);
  }
  w.EndSection();
  for (const auto& stage : run.stages()) {
    w.BeginSection(StageSection(stage->name()));
    stage->SaveRewrites(w, mp.first_record, mp.records);
    w.EndSection();
  }
  return w.Finish(kKind);
}

// The paths a step reads beyond the plan's, for CheckOutputClear.
std::vector<ReadPath> ReadsOf(const Plan& plan, const std::vector<std::string>& stages,
                              const std::vector<ReadPath>& extra) {
  std::vector<ReadPath> reads = PathsReadBy(plan);
  reads.insert(reads.end(), extra.begin(), extra.end());
  if (std::find(stages.begin(), stages.end(), "screen") != stages.end()) {
    reads.push_back({DefaultRulesDir(), "rules folder"});
  }
  return reads;
}

}  // namespace

std::string DecisionFileName(uint32_t part) { return "part-" + std::to_string(part) + ".decisions"; }

Status ObservePartToFile(const Plan& plan, const std::vector<std::string>& stages, const Part& part, FileSystem* fs,
                         const std::string& state_path) {
  if (Status clear = CheckOutputClear(state_path, ReadsOf(plan, stages, {})); !clear.ok()) return clear;
  auto run = ObservedRun::Start(plan, stages, fs);
  if (!run.ok()) return run.status();
  if (Status s = run.value()->ObservePart(part, fs); !s.ok()) return s;
  return run.value()->Save(state_path, fs);
}

Result<RunOutcome> DecideFromStates(const Plan& plan, const PipelineOptions& options,
                                    const std::vector<std::string>& state_paths, FileSystem* fs, std::FILE* log) {
  const auto wall_start = std::chrono::system_clock::now();
  const auto steady_start = std::chrono::steady_clock::now();
  if (plan.output.empty()) return Status::Usage("no output folder: pass --out DIR or set \"output\" in the plan");
  if (state_paths.empty()) return Status::Usage("no state files: name them with --state, in part order");
  if (Status v = ValidateFinishPlan(plan); !v.ok()) return v;
  auto made = ObservedRun::Start(plan, options.stages, fs);
  if (!made.ok()) return made.status();
  ObservedRun& run = *made.value();
  std::vector<ReadPath> extra = options.also_reads;
  for (const auto& p : state_paths) {
    extra.push_back({p, "state file"});
    if (Status s = run.Append(p, fs); !s.ok()) return s;
  }
  if (Status s = run.CheckInputs(); !s.ok()) return s;
  if (Status clear = CheckOutputClear(plan.output, ReadsOf(plan, options.stages, extra)); !clear.ok()) return clear;
  auto out = OutputDir::Begin(fs, plan.output, plan.overwrite);
  if (!out.ok()) return out.status();
  if (Status s = run.Decide(options); !s.ok()) return s;
  RunState& st = run.state();

  // One decision file per part, then the stages' own files.
  for (const MergedPart& mp : run.merged_parts()) {
    if (Status s = out.value()->Write(DecisionFileName(mp.part.part), DecisionBytes(plan, run, mp)); !s.ok()) return s;
  }
  for (const auto& stage : run.stages()) {
    if (Status s = stage->WriteOutputs(st, *out.value()); !s.ok()) return s;
  }
  if (options.companion) {
    if (Status s = options.companion->WriteOutputs(st, *out.value()); !s.ok()) return s;
  }

  // The lines pass 2 will write, per file (the ledger was counted when deciding).
  std::map<std::string, uint64_t> written;
  for (uint32_t in = 0; in < plan.inputs.size(); ++in) {
    for (const auto& split : st.split_names) written[OutputName(plan, split, in)] = 0;
  }
  written["rejects.jsonl"] = 0;
  RunOutcome outcome = run.outcome();
  for (size_t i = 0; i < st.entries.size(); ++i) {
    const Decision& d = st.decisions[i];
    if (d.rejected) ++written["rejects.jsonl"];
    else ++written[OutputName(plan, st.split_names[d.split], st.entries[i].input)];
  }

  Json summary = BuildSummary(plan, st, StageSections(run.stages(), options.companion, st), written);
  RunClock clock;
  clock.start_unix_seconds = std::chrono::duration_cast<std::chrono::seconds>(wall_start.time_since_epoch()).count();
  clock.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - steady_start).count();
  if (Status s = FinishSummary(plan, fs, *out.value(), &summary, run.gate(), RejectExamples(plan, st), clock);
      !s.ok()) {
    return s;
  }
  if (summary.contains("provenance")) {
    summary["provenance"]["parts"] = Json{
        {"parts", run.merged_parts().size()},
        {"note", "decided from state files (prefsift decide); the split files and rejects.jsonl are written per part "
                 "by prefsift apply, and are not listed here"}};
  }
  Status s = out.value()->Write("summary.json", summary.dump(2) + "\n");
  if (s.ok()) s = WriteDocuments(plan, fs, *out.value(), summary);
  if (s.ok()) s = out.value()->Commit();
  if (!s.ok()) return s;
  if (options.table) PrintLedgerTable(summary, log);
  return outcome;
}

Result<RunOutcome> ApplyPart(const Plan& plan, const std::vector<std::string>& stage_names, const Part& part,
                             const std::string& decisions_path, FileSystem* fs) {
  if (plan.output.empty()) return Status::Usage("no output folder: pass --out DIR");
  std::vector<std::unique_ptr<Stage>> stages;
  if (Status s = MakeRunStages(plan, stage_names, fs, &stages); !s.ok()) return s;
  std::vector<std::string> names;
  for (const auto& stage : stages) names.push_back(stage->name());
  auto bytes = ReadWholeFile(fs, decisions_path);
  if (!bytes.ok()) return bytes.status();
  auto opened = StateReader::Open(std::move(bytes).value(), kKind, decisions_path);
  if (!opened.ok()) return opened.status();
  StateReader& r = opened.value();
  auto enter = [&](const std::string& name) -> Status {
    if (r.EnterSection(name)) return Status::Ok();
    return Status::Input(decisions_path + ": the decision file has no section \"" + name + "\"");
  };

  if (Status s = enter("run"); !s.ok()) return s;
  const std::string fingerprint = r.Str();
  const Part got = ReadPart(r);
  if (Status s = r.LeaveSection(); !s.ok()) return s;
  if (fingerprint != ObservationFingerprint(plan, names)) {
    return Status::Usage(decisions_path + ": the decision file was made with another plan or other stages");
  }
  if (got.part != part.part || got.input != part.input || got.begin != part.begin || got.end != part.end ||
      got.first_line != part.first_line) {
    return Status::Usage(decisions_path + ": the decision file is for " + Describe(got) + ", not for " +
                         Describe(part));
  }
  if (part.input >= plan.inputs.size()) return Status::Usage(Describe(part) + " is not in this plan");

  RunState st(plan);
  st.inputs.resize(plan.inputs.size());
  if (Status s = enter("splits"); !s.ok()) return s;
  st.split_names.clear();
  for (uint64_t n = r.Count(8), i = 0; i < n && r.ok(); ++i) st.split_names.push_back(r.Str());
  if (Status s = r.LeaveSection(); !s.ok()) return s;

  if (Status s = enter("entries"); !s.ok()) return s;
  const uint64_t n = r.Count(13);
  for (uint64_t i = 0; i < n && r.ok(); ++i) {
    Entry e;
    e.input = part.input;
    e.line = r.U64();
    const int64_t rec = r.I64();
    if (rec >= static_cast<int64_t>(kMaxEntries) || i >= kMaxEntries) {
      r.Fail("more lines than one run holds (" + std::to_string(kMaxEntries) + ")");
      break;
    }
    e.record = static_cast<int32_t>(rec);
    st.entries.push_back(e);
    st.decisions.emplace_back();
    if (r.U8() != 0) {
      if (!ReadReject(r, st, i)) break;
    } else {
      st.decisions.back().split = r.U32();
      if (st.decisions.back().split >= st.split_names.size()) r.Fail("a split out of range");
    }
    if (e.record >= 0) {
      if (e.record != static_cast<int64_t>(st.records.size())) r.Fail("records out of order");
      RecordFacts f;
      f.entry = static_cast<uint32_t>(i);
      f.id = r.Str();
      st.records.push_back(std::move(f));
    }
  }
  if (Status s = r.LeaveSection(); !s.ok()) return s;
  for (auto& stage : stages) {
    if (Status s = enter(StageSection(stage->name())); !s.ok()) return s;
    if (Status s = stage->LoadRewrites(r, st.records.size()); !s.ok()) return s;
    if (Status s = r.LeaveSection(); !s.ok()) return s;
  }

  if (Status clear = CheckOutputClear(plan.output, ReadsOf(plan, stage_names, {{decisions_path, "decision file"}}));
      !clear.ok()) {
    return clear;
  }
  auto out = OutputDir::Begin(fs, plan.output, plan.overwrite);
  if (!out.ok()) return out.status();
  std::map<std::string, uint64_t> written;
  if (Status s = ApplyInputs(plan, st, stages, fs, *out.value(), &part, &written); !s.ok()) return s;
  RunOutcome outcome;
  for (const Decision& d : st.decisions) ++(d.rejected ? outcome.rejected : outcome.kept);
  outcome.entries = st.entries.size();
  uint64_t lines = 0;
  for (const auto& [name, k] : written) lines += k;
  if (lines != outcome.entries) {
    return Status::Internal("the part's ledger does not balance (entries " + std::to_string(outcome.entries) +
                            ", lines written " + std::to_string(lines) + "); nothing was written");
  }
  if (Status s = out.value()->Commit(); !s.ok()) return s;
  return outcome;
}

}  // namespace prefsift
