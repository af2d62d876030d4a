// The conditional-logit choice model a reward model is trained with, fitted
// to annotation data with hand-made features (length, slot, ...), so the
// bias stage can say how much each surface feature predicts the choice.
//
// Comparison i shows B_i >= 2 candidates with feature rows x_ij (dim
// features each) and the annotator chose c_i (for a ranking: the top one).
//   P_i(j) = exp(w . x_ij) / sum_k exp(w . x_ik)
//   objective(w) = -sum_i log P_i(c_i) + (l2 / 2) ||w||^2
// For B = 2 this is Bradley-Terry, i.e. logistic regression on the feature
// difference x_c - x_other without intercept.
//
// All functions are pure and thread-safe (no shared state). Method, stopping
// rules and the k-fold procedure: docs/statistics.md.
#pragma once

#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

#include "core/status.h"

namespace prefsift::stats {

// Annotation data in flat form. Comparison i owns candidate rows
// offsets[i] .. offsets[i+1]-1 of `features` (row-major, `dim` values a row).
struct ChoiceData {
  int dim = 0;
  std::vector<double> features;
  std::vector<size_t> offsets = {0};
  std::vector<uint32_t> chosen;  // index within the comparison, 0-based
  // Optional: one group id per comparison (e.g. the prompt), so comparisons of
  // one group land in the same cross-validation fold. Empty = each comparison
  // is its own group.
  std::vector<uint64_t> group;

  // Appends one comparison. `rows` holds B * dim values (B = rows.size()/dim).
  // Validation happens in FitChoiceModel / CrossValidatedAccuracy.
  void Add(const std::vector<double>& rows, uint32_t chosen_index);
  size_t size() const { return chosen.size(); }
};

struct ChoiceFitOptions {
  double l2 = 0.0;           // lambda of (lambda/2)||w||^2; 0 = plain maximum likelihood
  bool standardize = false;  // fit on x / sd(x) (sd over all candidate rows); see ChoiceFit
  int max_iterations = 100;  // Newton iterations
  // Converged when the Newton decrement g' H^-1 g / 2 (the objective drop the
  // next Newton step predicts) is <= tolerance * objective; that step is then
  // taken. The decrement is computed from g and H, so it can go far below the
  // objective's own rounding (~1e-16 relative).
  double tolerance = 1e-20;
};

enum class ChoiceFitOutcome {
  kConverged,      // stopping rule met, Hessian well conditioned
  kSeparated,      // l2 == 0 and the data are (quasi-)separable: the maximum-
                   // likelihood weights are infinite; weights shown are the last iterate
  kNotIdentified,  // some feature combination does not vary within any
                   // comparison (constant or collinear features) and l2 == 0
  kMaxIterations,  // ran out of iterations for another reason
};

struct ChoiceFit {
  // Weights on the RAW feature scale (what a caller multiplies raw features
  // by). With standardize, raw = standardized / sd.
  std::vector<double> weights;
  // Weights on the scale the fit ran on (= weights unless standardize).
  std::vector<double> fitted_scale_weights;
  // Standard errors of `weights` (raw scale): sqrt(diag(H^-1)) of the
  // penalised objective's Hessian (observed information) at the optimum.
  // Empty unless outcome == kConverged.
  std::vector<double> std_errors;
  double nll = 0.0;        // -sum_i log P_i(c_i) at the final weights
  double objective = 0.0;  // nll + penalty (fitted scale)
  int iterations = 0;
  double gradient_norm = 0.0;  // max-norm of the objective's gradient, fitted scale
  bool converged = false;      // outcome == kConverged
  ChoiceFitOutcome outcome = ChoiceFitOutcome::kMaxIterations;
  std::string message;  // one line for people, says what to do when not converged
};

// Fits the model by Newton's method with a backtracking (Armijo) line search,
// starting from w = 0. Errors (Status::Input): dim < 1, inconsistent sizes,
// a comparison with fewer than 2 candidates, a chosen index out of range,
// non-finite features, negative or non-finite l2, empty data.
Result<ChoiceFit> FitChoiceModel(const ChoiceData& data, const ChoiceFitOptions& options);

// Objective value, gradient and Hessian (row-major dim x dim) at w on the
// raw scale; exposed for tests and diagnostics.
// REQUIRES: data valid (as FitChoiceModel checks), w.size() == dim.
struct ChoiceObjective {
  double value = 0.0;
  std::vector<double> gradient;
  std::vector<double> hessian;
};
ChoiceObjective EvaluateChoiceObjective(const ChoiceData& data, const std::vector<double>& w,
                                        double l2);

// Share of comparisons where the chosen candidate has the highest score
// w . x. When t candidates tie for the highest score and the chosen one is
// among them, the comparison counts 1/t. REQUIRES: data valid, w.size() == dim.
double ChoiceAccuracy(const ChoiceData& data, const std::vector<double>& w);

struct CrossValidation {
  double accuracy = 0.0;                // held-out credit / comparisons, pooled over folds
  std::vector<double> fold_accuracy;    // per fold
  std::vector<size_t> fold_size;        // comparisons per fold
  int folds_not_converged = 0;          // folds whose training fit did not converge
};

// k-fold held-out accuracy. Groups (ChoiceData::group, or each comparison)
// are sorted by id, shuffled by a Fisher-Yates shuffle driven by splitmix64
// from `seed`, and the group at shuffled position r goes to fold r mod k.
// Each fold is predicted by a model fitted on the other folds with `options`
// (a non-converged fit still predicts; it is counted in folds_not_converged).
// Errors: as FitChoiceModel, or folds < 2, or fewer groups than folds.
Result<CrossValidation> CrossValidatedAccuracy(const ChoiceData& data,
                                               const ChoiceFitOptions& options, int folds,
                                               uint64_t seed);

// The cross-validation above and FitChoiceModel on every comparison, the
// fits run together (the whole fit and the folds' fits on up to `threads`
// threads, 0 = one per core): each result is the same as from its own call.
// cv and fit carry their own errors (a bad `data` fails both).
struct CrossValidatedFit {
  Result<CrossValidation> cv = Status::Internal("not run");
  Result<ChoiceFit> fit = Status::Internal("not run");
};
CrossValidatedFit CrossValidateAndFit(const ChoiceData& data, const ChoiceFitOptions& options, int folds,
                                      uint64_t seed, unsigned threads);

}  // namespace prefsift::stats
