// The two passes as the pipeline library's own units use them (pipeline.cc):
// making the plan's stages; pass 1 (observe) over the whole plan or one part
// into a RunState and the stages, and the per-input sanity checks that stop a
// run before anything is decided; pass 2 (apply) over the whole plan or one
// part. Not for use outside src/pipeline.
//
// Thread-safety: one run per call; calls on one run are not concurrent.
#pragma once

#include <nlohmann/json.hpp>

#include <cstdint>
#include <functional>
#include <utility>
#include <cstdio>
#include <map>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "core/record_reader.h"
#include "core/run_state.h"
#include "core/status.h"
#include "io/file_system.h"
#include "io/output_dir.h"
#include "pipeline/parts.h"
#include "pipeline/pipeline.h"
#include "stages/stage_context.h"
#include "stages/stage.h"

namespace prefsift {

class Progress;
class ThreadPool;

// The first reject of one ingest reason in one file, and how many there were.
struct IngestTally {
  uint64_t count = 0;
  std::string field;
  uint64_t first_line = 0;
  std::string first_keys;  // top-level keys of the first rejected line, or a note
};

// What the sanity checks need of one input beyond its InputStats.
struct InputIngest {
  std::map<std::string, IngestTally> tallies;  // by reason
  BaseEvidence evidence;
  bool at_file_end = true;                     // the part read to the file's end
  // Adds a later part's figures (the first reject stays the earlier one's).
  void Add(const InputIngest& later);
};

// The plan's stages named in `names`, in pipeline order (disabled ones left
// out); a usage error names an unknown stage in the plan.
Status MakeRunStages(const Plan& plan, const std::vector<std::string>& names, FileSystem* fs,
                     std::vector<std::unique_ptr<Stage>>* out);

// Pass 1. Without a part: every input, each checked (CheckInputSanity) as it
// ends. With one: that part of one input only, unchecked; its figures go to
// (*ingest)[part->input] for the check after all parts are merged.
Status ObserveInputs(const Plan& plan, RunState& st, std::vector<std::unique_ptr<Stage>>& stages, FileSystem* fs,
                     const Part* part, std::vector<InputIngest>* ingest);

// Every input line's decision counted into its input's figures and the run's.
RunOutcome CountLedger(RunState& st);

// Decide: every stage's Decide in pipeline order (a companion's last), the
// ledger counted into *outcome, then the gate over the stages' typed figures,
// all before pass 2. `command_stages`: the stages the command runs (gate checks
// of others are skipped). `mark`, if set, is called after each step (timings).
// Returns the gate section of the summary.
Result<nlohmann::ordered_json> DecideStages(const Plan& plan, std::vector<std::unique_ptr<Stage>>& stages,
                                            RunCompanion* companion, StageContext& ctx,
                                            const std::vector<std::string>& command_stages, RunOutcome* outcome,
                                            const std::function<void(const std::string&)>& mark = {});

// Each stage's summary section as the stage renders it, in pipeline order
// (the companion's last).
std::vector<std::pair<std::string, nlohmann::ordered_json>> StageSections(
    const std::vector<std::unique_ptr<Stage>>& stages, const RunCompanion* companion, const RunState& st);

// The sanity checks of one input (docs/cli.md: exit codes 2, 7 and 8).
Status CheckInputSanity(const Plan& plan, uint32_t input, const InputStats& stats, const InputIngest& ingest);

// The file a kept line of `input` goes to for `split` ("train.jsonl", or
// "train.<input name>.jsonl" when the inputs' layouts differ).
std::string OutputName(const Plan& plan, const std::string& split, uint32_t input);

// One rejects.jsonl line for an entry (ends in a newline); `raw` is the line as
// read (or as rewritten).
std::string RejectLine(const Plan& plan, const RunState& st, const Entry& e, const Decision& d, std::string_view raw);

// The summary's reject examples: the first rejected line of each stage and
// reason, in output order (input by input, line by line): its input, line, id,
// field and message (texts with invalid UTF-8 replaced, as rejects.jsonl
// writes them), never record text. From the decisions, so no file is read.
nlohmann::ordered_json RejectExamples(const Plan& plan, const RunState& st);

// Pass 2 of the whole plan, or of one part (then `st` holds that part's
// entries only): every entry's line to its split file or rejects.jsonl in
// `out` (every split file of every input is made, even when empty); lines
// written per file name to *written. Lines that change (rewritten by a stage,
// or rejected) are built on `pool` (null: a pool of plan.threads), so a
// stage's Rewrite may run on several threads at once; `progress` may be null
// (silent). Implemented in apply_pass.cc.
Status ApplyInputs(const Plan& plan, RunState& st, std::vector<std::unique_ptr<Stage>>& stages, FileSystem* fs,
                   OutputDir& out, const Part* part, std::map<std::string, uint64_t>* written,
                   ThreadPool* pool = nullptr, Progress* progress = nullptr);

}  // namespace prefsift
