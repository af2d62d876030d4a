// The "bias" stage: position and length bias statistics, optional position
// and length rebalancing, and the shortcut audit (docs/bias.md).
//
//   Observe  per record: surface features of every candidate (small).
//   Decide   statistics over kept records; length rebalancing rejects records
//            (reason length_rebalance); position rebalancing picks a
//            permutation per record; statistics and audit again on the result.
//   Rewrite  permuted records: candidates reordered (whole elements) and the
//            judgment (choice, ranks or order) remapped, in the record's layout.
//   Report   stages.bias in summary.json; the gate reads
//            stages.bias.shortcut_audit.heldout_accuracy and .flagged.
//
// Settings (plan "stages": {"bias": {...}}; docs/plan.md): correction, alpha,
// min_group_records, position.rebalance, length.{rebalance, target, tolerance,
// unit, bins}, shortcut_audit.{folds, threshold, l2, min_records}.
// Thread-safety: Observe runs concurrently for distinct records after Grow.
#pragma once

#include <memory>

#include "stages/stage.h"

namespace prefsift {

std::unique_ptr<Stage> MakeBiasStage(const Plan& plan, FileSystem* fs, Status* error);

}  // namespace prefsift
