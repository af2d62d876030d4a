// StageContext: what one stage's Decide may see and give (docs/architecture.md).
//
//   plan      the whole plan (settings: StageSettings(plan, name))
//   fs        the file system every file access goes through (io/file_system.h)
//   run       the fact table and the decisions (core/run_state.h)
//   results   typed results of earlier stages, and where this stage publishes
//             its own (stages/stage_results.h): nothing passes between stages
//             through public fields or stage-name strings
//   prior     read-only prior data (a store's comparisons, band keys and group
//             splits; stages/prior_data.h), or null in a plain run
//
// Thread-safety: one Decide at a time, on one thread.
#pragma once

#include "core/plan.h"
#include "core/run_state.h"
#include "stages/stage_results.h"

namespace prefsift {

class FileSystem;
class PriorData;

struct StageContext {
  const Plan& plan;
  FileSystem* fs;
  RunState& run;
  StageResults& results;
  const PriorData* prior = nullptr;
};

}  // namespace prefsift
