// Near-duplicate prompts (MinHash + LSH) and near-identical candidates.
//
// Observe (parallel, distinct records): normalises the prompt text
// (Record::UserPromptText: the plain prompt, or the user turns of a chat),
// shingles it (word 5-grams, or code-point 5-grams for text written without
// spaces) and stores only its compact MinHash signature (K bytes), plus the
// sorted shingle hash set when the plan asks for "verify": "exact". It also
// compares the candidates of the record with each other and keeps the pairs
// at or above the candidate threshold (a few bytes; the texts are not kept).
//
// It also keeps the prompt's key sketch (the `keys` smallest 32-bit shingle
// keys, sketch/key_sketch.h).
//
// Decide (one thread), over the records still kept after earlier stages:
//   1. Candidate pairs -> verification (estimated Jaccard from the full
//      signature, or exact Jaccard) -> union-find clusters
//      (sketch/clusters.h). RunState::near_cluster gets the cluster id
//      (smallest member record index) or -1. Candidates come from LSH banding
//      of the whole-set signatures (b bands x r rows), unless some key is held
//      by `template_min_prompts` sketches (template text): then from the key
//      sketches, with those keys set aside (docs/near-duplicates.md,
//      "Template text").
//   2. Near-identical candidates: "flag" (count and list) or "reject"
//      (near_identical_candidates).
//   3. Optional cap "max_per_cluster": the first kept members in input order
//      stay, the rest are rejected (near_duplicate_over_cap).
// Outputs: clusters.jsonl, near_identical.jsonl; summary section "near".
// Settings (plan "stages": {"near": {...}}): docs/plan.md; method and
// figures: docs/near-duplicates.md ("Pipeline stage").
#pragma once

#include <memory>

#include "stages/stage.h"

namespace prefsift {

std::unique_ptr<Stage> MakeNearStage(const Plan& plan, FileSystem* fs, Status* error);

}  // namespace prefsift
