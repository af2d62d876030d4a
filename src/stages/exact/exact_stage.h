// Exact duplicates, label conflicts and degenerate comparisons.
//
// Keys are XXH3-128 hashes of normalised text (core/normalize.h):
//   comparison key = prompt hash + the sorted set of candidate hashes
//   judgment       = the ranks, read in that sorted candidate order
// Cases (docs/exact-duplicates.md):
//   degenerate            two candidates equal after normalisation, one ranked
//                         above the other -> rejected (degenerate_comparison)
//   repeated comparison   same key, same judgment -> the first in input order is
//                         kept, the rest rejected (duplicate_comparison)
//   label conflict        same key, different judgments -> policy "conflicts":
//                         keep-majority (default), drop-all, keep-all
// Settings (plan "stages": {"exact": {...}}): "conflicts".
#pragma once

#include <memory>

#include "stages/stage.h"

namespace prefsift {

std::unique_ptr<Stage> MakeExactStage(const Plan& plan, FileSystem* fs, Status* error);

// The comparison key of a record (prompt hash + sorted candidate hashes) and,
// in *judgment, the hash of its ranks read in that order. Shared with the
// store (src/store) so both match records the same way.
Hash128 ComparisonKeyOf(const RecordFacts& f, Hash128* judgment);

}  // namespace prefsift
