// Train/evaluation leakage: training records whose prompt (or, optionally, a
// candidate answer) matches an item of a user-named evaluation set.
//
// The evaluation sets are read and indexed once, when the stage is made
// (src/stages/leakage/eval_index.h, src/stages/leakage/leak_index.h). Observe checks each record's
// prompt (Record::UserPromptText) and keeps only the findings; Decide applies
// each detector's policy: "drop" rejects the record (reasons eval_leak_exact,
// eval_leak_ngram, eval_leak_near, eval_leak_answer), "flag" keeps it. Every
// contaminated record, dropped or flagged, is listed in leakage.jsonl;
// summary.json gets counts and rates per evaluation set and detector.
// Settings: plan "stages": {"leakage": {...}}, documented in docs/plan.md.
#pragma once

#include <memory>

#include "stages/stage.h"

namespace prefsift {

std::unique_ptr<Stage> MakeLeakageStage(const Plan& plan, FileSystem* fs, Status* error);

}  // namespace prefsift
