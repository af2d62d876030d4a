// Incremental runs: one batch added to a growing store (docs/store.md).
//
// AddBatch runs the whole pipeline over the batch with the store as the
// stages' read-only prior data (stages/prior_data.h), and the stages decide
// against it themselves (stages/prior_join.h):
//   exact   rejects records whose comparison key is already stored
//           (store_duplicate, or store_label_conflict when the stored
//           judgment differs);
//   near    matches the batch's signatures against the stored band keys
//           (same banding and verification), so batch records join stored
//           clusters and bridged clusters merge;
//   split   ties batch records to stored groups (prompt, near cluster,
//           thread, annotator, group key as the plan's tie_by says); a record
//           inherits its stored group's split; a component tying groups in
//           different splits is rejected (store_group_conflict) or, with the
//           policy join-first, joins the group accepted first (nothing stored
//           moves).
// A store companion (stages/stage.h RunCompanion) runs after the last stage
// and writes the batch's facts into the store.
// The whole batch is one transaction (BEGIN IMMEDIATE before reading the
// store, COMMIT after the output folder is in place).
//
// Thread-safety: one call at a time per process; processes serialise on the
// store's write lock.
#pragma once

#include <cstdio>
#include <string>
#include <vector>

#include "core/plan.h"
#include "core/status.h"
#include "io/file_system.h"

namespace prefsift::store {

// What happens to batch records that tie stored groups sitting in different
// splits (plan: "store": {"group_conflicts": ...}; docs/store.md).
enum class ConflictPolicy {
  kReject,     // rejected with store_group_conflict (the default)
  kJoinFirst,  // joins the group accepted first and takes its split
};

// The plan's "store" value: a path string, or {"path", "group_conflicts"}.
struct StoreSettings {
  std::string path;  // resolved against the plan's folder; "" when absent
  ConflictPolicy group_conflicts = ConflictPolicy::kReject;
};

struct AddOptions {
  std::string store_path;      // "" = the plan's "store"
  int wait_ms = 30000;         // busy timeout for a store another run is writing
  bool progress = false;
  bool table = true;
};

struct AddOutcome {
  bool already_added = false;  // the same inputs and plan were added before: nothing done
  int64_t batch = 0;
  uint64_t entries = 0, kept = 0, rejected = 0;
  bool gate_failed = false;
};

// Adds the plan's inputs as one batch. The plan must run the exact and split
// stages; "verify": "exact" (near) and "stratify_by": "source" (split) are
// refused. REQUIRES: plan.output set.
Result<AddOutcome> AddBatch(const Plan& plan, const AddOptions& options, FileSystem* fs, std::FILE* log);

// The same, for a batch observed in parts (docs/parts.md): the parts' state
// files (in part order, observed with every stage) are decided against the
// store as AddBatch decides the whole batch, into plan.output (decision files,
// summary, stage files, store_conflicts.jsonl); `prefsift apply` then writes
// each part's outputs. Stored groups keep their splits; the store is changed
// only when the gate passes, in one transaction.
Result<AddOutcome> AddBatchFromStates(const Plan& plan, const AddOptions& options,
                                      const std::vector<std::string>& state_paths, FileSystem* fs, std::FILE* log);

// The "store" value of a plan file, read again through `fs` (usage errors
// name the key).
Result<StoreSettings> StoreSettingsFromPlan(FileSystem* fs, const Plan& plan);

// Test hook: when the environment variable PREFSIFT_TEST_KILL_AT equals
// `phase`, the process raises SIGKILL here. Phases: after-begin, mid-write,
// before-commit, after-commit (docs/store.md, "Crash safety").
void MaybeKill(const char* phase);

}  // namespace prefsift::store
