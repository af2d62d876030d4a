// Shortcut audit (docs/bias.md section 5): can surface features alone predict
// the annotators' choices? Fits the conditional-logit choice model
// (stats/choice_model.h) on per-candidate surface features - log(1 + words),
// list items, code block, heading, refusal/apology phrase, URL, and the slot
// for layouts that have one - and reports the k-fold held-out accuracy with
// folds by prompt (RecordFacts::prompt_hash), the fitted weights with standard
// errors, and a flag when the accuracy is significantly above the expected
// rate: per comparison max(1/B, share of the most common chosen slot among
// comparisons of that B), tested one-sided on the Poisson-binomial sum of
// those rates (stats::PoissonBinomialSf), with a minimum lift.
//
// Pure function over the RunState; thread-safe for concurrent readers.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <cstdint>
#include <string>
#include <vector>

#include "stages/bias/bias_common.h"
#include "core/run_state.h"

namespace prefsift::bias {

struct AuditOptions {
  int folds = 5;
  double alpha = 0.01;         // flagged when p < alpha and lift >= min_lift
  double min_lift = 0.05;      // held-out accuracy minus the expected rate
  double l2 = 1.0;             // penalty on the standardised scale
  uint64_t min_records = 50;   // fewer usable records: the audit is skipped, with a reason
  unsigned threads = 0;        // fits run at once (the run's --threads; 0 = one per core); results do not depend on it
};

struct AuditResult {
  bool ran = false;
  std::string skipped;                 // why it did not run ("" when it ran)
  uint64_t comparisons = 0;            // records with a single chosen candidate
  uint64_t prompt_groups = 0;
  std::vector<std::string> features;     // the columns fitted
  std::vector<std::string> not_varying;  // left out: never differ within a comparison
  double heldout_accuracy = 0.0;
  double chance_accuracy = 0.0;        // expected rate: mean over comparisons of max(1/B, top slot share at B)
  double uniform_chance = 0.0;         // mean of 1/B over the comparisons
  double lift = 0.0;                   // heldout_accuracy - chance_accuracy
  double p_value = 1.0;                // one-sided, P(S >= correct) under the expected rates
  bool exact_test = true;              // false: normal approximation
  uint64_t correct = 0;                // held-out credit, rounded to the nearest comparison
  struct ByB { uint32_t b; uint64_t n; double rate; };
  std::vector<ByB> chance_by_b;        // the expected rate per B
  struct Carrier { std::string feature; double weight, z; };
  std::vector<Carrier> carriers;       // features with |weight / std_error| >= 1.96, by |z|
  std::vector<double> fold_accuracy;
  std::vector<size_t> fold_size;
  int folds_not_converged = 0;
  double training_accuracy = 0.0;      // of the fit on all comparisons
  std::vector<double> weights, std_errors;  // raw scale, one per feature
  bool converged = false;
  std::string outcome, message;
  int iterations = 0;
  bool flagged = false;
};

// Names of the features, in column order (slot last, when used).
std::vector<std::string> AuditFeatureNames(bool with_slot);

// `surface[r]` holds record r's candidate facts (file order); `new_slot_of`
// as in ComputePositionStats (null = file order). REQUIRES: surface sized
// st.records.size() with entries for every record in `records`.
AuditResult RunShortcutAudit(const RunState& st, const std::vector<size_t>& records,
                             const std::vector<CandidateSurfaces>& surface,
                             const std::vector<std::vector<uint32_t>>* new_slot_of, uint64_t seed,
                             const AuditOptions& options);

void AuditToJson(const AuditResult& a, const AuditOptions& options, nlohmann::ordered_json* out);

}  // namespace prefsift::bias
