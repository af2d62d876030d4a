// The pipeline: observe (pass 1, parallel over chunks of lines), decide (each
// stage in order), apply (pass 2: every input line to exactly one output), then
// summary.json and the stages' own files. Outputs appear atomically.
#pragma once

#include <cstdio>
#include <string>
#include <vector>

#include "core/plan.h"
#include "core/status.h"
#include "io/file_system.h"
#include "io/output_dir.h"

namespace prefsift {

class PriorData;
class RunCompanion;

struct PipelineOptions {
  std::vector<std::string> stages;  // stage names to run, in any order; run in pipeline order
  bool progress = false;            // a progress line on `log`, rewritten in place (use when it is a terminal)
  bool progress_lines = false;      // else one progress line every few seconds (logs, CI; `--progress`)
  double progress_seconds = 5;      // the interval of those lines
  bool table = true;                // the ledger table on `log` at the end
  bool timings = false;             // wall seconds per phase and stage on `log` (diagnostics only)
  RunCompanion* companion = nullptr;  // optional (src/store): see RunCompanion in stages/stage.h
  const PriorData* prior = nullptr;   // optional prior data for the stages (a store; stages/prior_data.h)
  bool want_signatures = false;       // the near stage publishes its signatures (NearSignatures) for the caller
  std::vector<ReadPath> also_reads;   // paths beyond the plan's that the output must not touch (e.g. the store)
};

struct RunOutcome {
  uint64_t entries = 0, kept = 0, rejected = 0, blank_lines = 0;
  bool gate_failed = false;
  bool nothing_kept() const { return entries > 0 && kept == 0; }
};

// Every file or folder a run with this plan reads: the plan file, the inputs,
// and the paths named in stage settings (evaluation sets, rule packs and their
// folder, key file, previous split assignments).
std::vector<ReadPath> PathsReadBy(const Plan& plan);

Result<RunOutcome> RunPipeline(const Plan& plan, const PipelineOptions& options, FileSystem* fs, std::FILE* log);

}  // namespace prefsift
