// Split audit: checks existing train / held-out files (made by prefsift or
// not) for leakage across the split, without changing them.
//
// Every held-out file is indexed as an evaluation set (src/stages/leakage/eval_index.h,
// preference format), the training file is read once and each training
// prompt is checked by the leakage detectors (src/stages/leakage/leak_index.h: exact,
// word n-gram, near-duplicate; every matching item, not just the best), so
// each held-out record gets the list of its training twins. Groups that
// appear on both sides are also reported: threads, the layout's group field,
// and annotators when asked.
// Writes <out>/audit.json (counts) and <out>/audit.jsonl (one line per
// held-out record with a twin, then one per shared group), atomically.
// Thread-safety: one call per output folder; uses up to `threads` threads.
#pragma once

#include <cstdio>
#include <string>
#include <vector>

#include "core/layout.h"
#include "core/normalize.h"
#include "core/plan.h"
#include "core/record_reader.h"
#include "core/status.h"
#include "stages/leakage/leak_index.h"

namespace prefsift {

class FileSystem;

struct AuditOptions {
  std::string train_path;
  std::vector<std::string> heldout_paths;
  Layout train_layout;
  std::vector<Layout> heldout_layouts;  // one per held-out path
  LeakSettings detectors;               // eval_sets and policies are ignored
  NormalizeOptions normalize;
  InputLimits limits;
  bool by_annotator = false;
  unsigned threads = 1;
  std::string out;
  bool overwrite = false;
  uint32_t max_twins = 5;               // twins listed per held-out record
};

struct AuditOutcome {
  uint64_t train_records = 0, train_unreadable = 0;
  uint64_t heldout_records = 0;
  uint64_t heldout_with_twin = 0;
  uint64_t by_detector[kLeakDetectors] = {0, 0, 0, 0};  // held-out records with a twin of that kind
  uint64_t shared_groups = 0;
  bool leak_found = false;
  std::string table;  // a short plain-text table for the terminal
};

// Fills AuditOptions from a plan: detector settings from stages.leakage
// (eval_sets ignored), normalisation, limits, threads, output. Layouts: when
// `layouts_from_last_inputs`, the plan's last 1 + heldout.size() inputs are
// the train and held-out files with their layouts (the command line added
// them); otherwise each file takes the layout of the plan input with the same
// path, or else of the plan's first input.
Result<AuditOptions> AuditOptionsFromPlan(const Plan& plan, const std::string& train,
                                          const std::vector<std::string>& heldout, bool layouts_from_last_inputs);

// REQUIRES: heldout_layouts.size() == heldout_paths.size() >= 1.
Result<AuditOutcome> RunSplitAudit(const AuditOptions& options, FileSystem* fs);

}  // namespace prefsift
