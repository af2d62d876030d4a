// Annotator quality (docs/annotators.md): agreement beyond chance, each
// annotator against the others, intransitive judgments and rushed judgments.
//
//   agreement   Krippendorff's alpha (nominal) over comparisons judged by two
//               or more annotators (same normalised prompt and candidate set,
//               any order; a judgment's value is the chosen candidate's
//               identity), whole set and per source, with a seeded bootstrap
//               interval; Fleiss' kappa where every such comparison has the
//               same number of judgments.
//   annotators  each annotator's agreement with the majority of the others on
//               shared comparisons, a binomial test against the rest of the
//               set's rate, Holm or Benjamini-Hochberg over annotators; those
//               significantly below are "candidates for review". Policy
//               "flagged": report (default), drop (reason flagged_annotator)
//               or weight (writes a weight at the plan's JSON Pointer).
//   cycles      per prompt, the majority preference graph of its candidates;
//               strongly connected components of 3+ candidates are cycles.
//               Policy "cycles": report (default) or reject
//               (reason intransitive_judgment).
//   speed       with a timestamp in the layout: judgments much faster than
//               the annotator's own median gap or the set's (rushed).
// Runs before "exact" so that a vote among repeated judgments can leave out
// dropped ones; it reads every parsed record.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <memory>

#include "stages/stage.h"

namespace prefsift {

std::unique_ptr<Stage> MakeAnnotatorsStage(const Plan& plan, FileSystem* fs, Status* error);

// Agreement only (alpha, interval, comparisons, raw rate) over every parsed
// record of `st`, with the plan's annotators settings: for a store's batch
// row (docs/store.md). Null when the stage is disabled or its settings are bad.
nlohmann::ordered_json BatchAgreement(const Plan& plan, const RunState& st);

}  // namespace prefsift
