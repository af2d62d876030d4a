// The pipeline as three steps over parts of the inputs (docs/parts.md), for
// many machines: `observe` (one part -> one state file), `decide` (all state
// files -> one decision file per part, each stage's files, summary.json,
// datasheet, report and the gate verdict), `apply` (one part and its decision
// file -> that part's split files and rejects.jsonl). Concatenating the
// parts' split files and rejects in part order gives the files of `run`; the
// summary figures and the gate verdict are those of `run`.
//
// Every file is written atomically (a staging name, then renamed), so a step
// that is run again never leaves, or lets another step see, half a file.
// Thread-safety: one call per thread.
#pragma once

#include <cstdio>
#include <string>
#include <vector>

#include "core/plan.h"
#include "core/status.h"
#include "io/file_system.h"
#include "pipeline/parts.h"
#include "pipeline/pipeline.h"

namespace prefsift {

// The name of a part's decision file in decide's output folder ("part-3.decisions").
std::string DecisionFileName(uint32_t part);

// Pass 1 over `part`; its state file written to `state_path`.
Status ObservePartToFile(const Plan& plan, const std::vector<std::string>& stages, const Part& part, FileSystem* fs,
                         const std::string& state_path);

// Merges the state files (in part order, covering every input), decides, and
// writes plan.output. options.stages must be those the parts were observed
// with; the outcome's gate_failed is the gate verdict.
Result<RunOutcome> DecideFromStates(const Plan& plan, const PipelineOptions& options,
                                    const std::vector<std::string>& state_paths, FileSystem* fs, std::FILE* log);

// Pass 2 over `part` with its decision file: the part's outputs in plan.output.
Result<RunOutcome> ApplyPart(const Plan& plan, const std::vector<std::string>& stages, const Part& part,
                             const std::string& decisions_path, FileSystem* fs);

}  // namespace prefsift
