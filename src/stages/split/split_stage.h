// Group-aware, stable splits (stage "split", the last stage).
//
// Records are tied into groups (connected components, union-find) by any of
// the ties the plan names in "tie_by": "prompt" (same normalised prompt),
// "near" (same near-duplicate cluster, NearClusters), "thread",
// "annotator", "group" (the layout's group pointer). A group goes wholly to
// one split: its stable key is the smallest normalised-prompt hash among its
// members; XXH3 of (salt, key) mapped to [0,1) picks the split against the
// cumulative ratios. The key does not depend on input order or on records
// outside the group, so added data moves a record only when its group gains
// a member with a smaller key (docs/splits.md).
//
// With "stratify_by": "source", groups are ranked by that hash value within
// their source and cut at the cumulative ratios by records: near-exact
// fractions per source, but a group near a cut may move when data is added.
//
// The stage also reports the composition of the kept records (candidates per
// record, chosen slot, lengths, sources, annotators, dominant script) for the
// datasheet and the report. It never rejects.
//
// Settings (plan "stages": {"split": {...}}): splits, tie_by, salt,
// stratify_by, previous. Thread-safety: Observe for distinct records only.
#pragma once

#include <memory>

#include "stages/prior_join.h"
#include "stages/stage.h"

namespace prefsift {

std::unique_ptr<Stage> MakeSplitStage(const Plan& plan, FileSystem* fs, Status* error);

// The split names and tie kinds the plan's split settings give (the stage's
// own parsing and defaults; a store reads them through here).
Result<SplitShape> SplitShapeOf(const Plan& plan);

// Dominant Unicode script of a text by letter count ("Latin", "Cyrillic", ...,
// "other", or "none" without letters). A crude detector: block ranges only.
std::string DominantScript(std::string_view utf8);

// The split position in [0,1) of a group key under a salt (exposed for tests).
double SplitPosition(const std::string& salt, const Hash128& key);

}  // namespace prefsift
