#include "stages/bias/shortcut_audit.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cmath>
#include <map>

#include "stats/choice_model.h"
#include "stats/hypothesis_tests.h"

namespace prefsift::bias {
namespace {

using Json = nlohmann::ordered_json;

const char* OutcomeName(stats::ChoiceFitOutcome o) {
  switch (o) {
    case stats::ChoiceFitOutcome::kConverged: return "converged";
    case stats::ChoiceFitOutcome::kSeparated: return "separated";
    case stats::ChoiceFitOutcome::kNotIdentified: return "not-identified";
    case stats::ChoiceFitOutcome::kMaxIterations: return "max-iterations";
  }
  return "?";
}

}  // namespace

std::vector<std::string> AuditFeatureNames(bool with_slot) {
  std::vector<std::string> n = {"log1p_words", "list_items", "code_block", "heading", "refusal_phrase", "url"};
  if (with_slot) n.push_back("slot");
  return n;
}

AuditResult RunShortcutAudit(const RunState& st, const std::vector<size_t>& records,
                             const std::vector<CandidateSurfaces>& surface,
                             const std::vector<std::vector<uint32_t>>* new_slot_of, uint64_t seed,
                             const AuditOptions& o) {
  AuditResult a;
  bool with_slot = false;
  for (size_t r : records) {
    const RecordFacts& f = st.records[r];
    if (PreferredIndex(f) >= 0 && HasSlots(f)) with_slot = true;
  }
  const std::vector<std::string> all_features = AuditFeatureNames(with_slot);
  const size_t dim = all_features.size();
  // One comparison's candidate rows with all `dim` features; -1 when the
  // record has no single chosen candidate.
  std::vector<double> rows;
  auto rows_of = [&](size_t r) -> int {
    const RecordFacts& f = st.records[r];
    const int c = PreferredIndex(f);
    if (c < 0) return -1;
    const auto& cands = surface[r];
    const std::vector<uint32_t>* moved =
        new_slot_of && r < new_slot_of->size() && !(*new_slot_of)[r].empty() ? &(*new_slot_of)[r] : nullptr;
    rows.clear();
    for (size_t i = 0; i < cands.size(); ++i) {
      const CandidateSurface& cs = cands[i];
      rows.push_back(std::log1p(static_cast<double>(cs.words)));
      rows.push_back(static_cast<double>(cs.list_items));
      rows.push_back(cs.flags & CandidateSurface::kCodeBlock ? 1.0 : 0.0);
      rows.push_back(cs.flags & CandidateSurface::kHeading ? 1.0 : 0.0);
      rows.push_back(cs.flags & CandidateSurface::kRefusal ? 1.0 : 0.0);
      rows.push_back(cs.flags & CandidateSurface::kUrl ? 1.0 : 0.0);
      if (with_slot) {
        // Pairwise layouts have no slot: 0 for both, so they carry no slot signal.
        rows.push_back(HasSlots(f) ? static_cast<double>(moved ? (*moved)[i] : i) : 0.0);
      }
    }
    return c;
  };
  // First pass: which features vary between the candidates of a comparison,
  // and the sizes, so the choice data is made once at its final size.
  std::vector<char> varies(dim, 0);
  size_t comparisons = 0, candidate_rows = 0;
  for (size_t r : records) {
    if (rows_of(r) < 0) continue;
    const size_t b = rows.size() / dim;
    for (size_t i = 1; i < b; ++i) {
      for (size_t k = 0; k < dim; ++k) varies[k] = varies[k] || rows[i * dim + k] != rows[k];
    }
    ++comparisons;
    candidate_rows += b;
  }
  // Features that never differ between the candidates of one comparison
  // carry no information (their weight is not identified): left out, listed.
  std::vector<size_t> cols;
  for (size_t k = 0; k < dim; ++k) {
    if (varies[k]) {
      cols.push_back(k);
      a.features.push_back(all_features[k]);
    } else {
      a.not_varying.push_back(all_features[k]);
    }
  }
  // Second pass: the choice data over the varying features.
  stats::ChoiceData data;
  data.dim = static_cast<int>(cols.size());
  data.features.reserve(candidate_rows * cols.size());
  data.offsets.reserve(comparisons + 1);
  data.chosen.reserve(comparisons);
  std::vector<uint64_t> group_of;
  group_of.reserve(comparisons);
  double chance = 0;
  std::map<uint32_t, std::vector<uint64_t>> slot_counts;  // B -> chosen slot counts (slot layouts)
  std::map<uint32_t, uint64_t> n_by_b;
  std::vector<double> kept;
  for (size_t r : records) {
    const int c = rows_of(r);
    if (c < 0) continue;
    const RecordFacts& f = st.records[r];
    const size_t b = rows.size() / dim;
    kept.clear();
    for (size_t j = 0; j < b; ++j) {
      for (size_t k : cols) kept.push_back(rows[j * dim + k]);
    }
    data.Add(kept, static_cast<uint32_t>(c));
    group_of.push_back(f.prompt_hash.hi ^ (f.prompt_hash.lo * 0x9E3779B97F4A7C15ULL));
    chance += 1.0 / static_cast<double>(b);
    ++n_by_b[static_cast<uint32_t>(b)];
    auto& sc = slot_counts[static_cast<uint32_t>(b)];
    sc.resize(b, 0);
    const std::vector<uint32_t>* moved =
        new_slot_of && r < new_slot_of->size() && !(*new_slot_of)[r].empty() ? &(*new_slot_of)[r] : nullptr;
    if (HasSlots(f)) ++sc[moved ? (*moved)[static_cast<size_t>(c)] : static_cast<size_t>(c)];
  }
  std::vector<double>().swap(rows);
  // Expected rate per B: a model that always named the most common slot
  // would reach that slot's share; below that, 1/B.
  std::vector<stats::BernoulliGroup> chance_groups;
  {
    double expected = 0;
    for (const auto& [b, n] : n_by_b) {
      const auto& sc = slot_counts[b];
      const uint64_t top = sc.empty() ? 0 : *std::max_element(sc.begin(), sc.end());
      const double rate = std::max(1.0 / b, static_cast<double>(top) / static_cast<double>(n));
      a.chance_by_b.push_back({b, n, rate});
      chance_groups.push_back({n, rate});
      expected += static_cast<double>(n) * rate;
    }
    a.uniform_chance = data.size() == 0 ? 0.0 : chance / static_cast<double>(data.size());
    chance = expected;
  }
  {
    std::vector<uint64_t> distinct = group_of;
    std::sort(distinct.begin(), distinct.end());
    a.prompt_groups = static_cast<uint64_t>(std::unique(distinct.begin(), distinct.end()) - distinct.begin());
  }
  data.group = std::move(group_of);
  a.comparisons = data.size();
  a.chance_accuracy = data.size() ? chance / static_cast<double>(data.size()) : 0.0;
  if (a.comparisons < o.min_records) {
    a.skipped = "only " + std::to_string(a.comparisons) + " comparisons with a single chosen candidate (minimum " +
                std::to_string(o.min_records) + ")";
    return a;
  }
  if (cols.empty()) {
    a.skipped = "no surface feature differs between the candidates of any comparison";
    return a;
  }
  if (a.prompt_groups < static_cast<uint64_t>(o.folds)) {
    a.skipped = "only " + std::to_string(a.prompt_groups) + " distinct prompts for " + std::to_string(o.folds) +
                " folds";
    return a;
  }
  stats::ChoiceFitOptions fo;
  fo.l2 = o.l2;
  fo.standardize = true;
  // The folds' fits and the whole fit together (each the same as alone).
  stats::CrossValidatedFit both = stats::CrossValidateAndFit(data, fo, o.folds, seed, o.threads);
  const auto& cv = both.cv;
  const auto& fit = both.fit;
  if (!cv.ok()) {
    a.skipped = "cross-validation failed: " + cv.status().message();
    return a;
  }
  if (!fit.ok()) {
    a.skipped = "fit failed: " + fit.status().message();
    return a;
  }
  a.ran = true;
  a.heldout_accuracy = cv.value().accuracy;
  a.fold_accuracy = cv.value().fold_accuracy;
  a.fold_size = cv.value().fold_size;
  a.folds_not_converged = cv.value().folds_not_converged;
  const stats::ChoiceFit& f = fit.value();
  a.weights = f.weights;
  a.std_errors = f.std_errors;
  a.converged = f.converged;
  a.outcome = OutcomeName(f.outcome);
  a.message = f.message;
  a.iterations = f.iterations;
  a.training_accuracy = stats::ChoiceAccuracy(data, f.weights);
  a.lift = a.heldout_accuracy - a.chance_accuracy;
  a.correct = static_cast<uint64_t>(std::llround(a.heldout_accuracy * static_cast<double>(a.comparisons)));
  const auto tail = stats::PoissonBinomialSf(a.correct, chance_groups);
  a.p_value = tail.p;
  a.exact_test = tail.exact;
  a.flagged = a.p_value < o.alpha && a.lift >= o.min_lift;
  for (size_t k = 0; k < a.features.size() && k < a.std_errors.size(); ++k) {
    if (!(a.std_errors[k] > 0)) continue;
    const double z = a.weights[k] / a.std_errors[k];
    if (std::fabs(z) >= 1.96) a.carriers.push_back({a.features[k], a.weights[k], z});
  }
  std::sort(a.carriers.begin(), a.carriers.end(), [](const AuditResult::Carrier& x, const AuditResult::Carrier& y) {
    return std::fabs(x.z) != std::fabs(y.z) ? std::fabs(x.z) > std::fabs(y.z) : x.feature < y.feature;
  });
  return a;
}

void AuditToJson(const AuditResult& a, const AuditOptions& o, Json* out) {
  Json& j = *out;
  j["ran"] = a.ran;
  if (!a.ran) {
    j["skipped"] = a.skipped;
    j["heldout_accuracy"] = nullptr;
    j["flagged"] = false;
    j["alpha"] = o.alpha;
    j["min_lift"] = o.min_lift;
    j["comparisons"] = a.comparisons;
    j["features_not_varying"] = a.not_varying;
    return;
  }
  j["heldout_accuracy"] = a.heldout_accuracy;
  j["flagged"] = a.flagged;
  j["chance_accuracy"] = a.chance_accuracy;
  j["uniform_chance"] = a.uniform_chance;
  j["lift"] = a.lift;
  j["p_value"] = a.p_value;
  j["test"] = a.exact_test ? "one-sided, exact Poisson-binomial over the expected rates"
                           : "one-sided, normal approximation to the Poisson-binomial over the expected rates";
  j["correct"] = a.correct;
  j["alpha"] = o.alpha;
  j["min_lift"] = o.min_lift;
  Json by_b = Json::array();
  for (const auto& g : a.chance_by_b) by_b.push_back(Json{{"b", g.b}, {"comparisons", g.n}, {"expected_rate", g.rate}});
  j["chance_by_b"] = std::move(by_b);
  Json carriers = Json::array();
  for (const auto& c : a.carriers) carriers.push_back(Json{{"feature", c.feature}, {"weight", c.weight}, {"z", c.z}});
  j["shortcut_features"] = std::move(carriers);
  j["comparisons"] = a.comparisons;
  j["prompt_groups"] = a.prompt_groups;
  j["folds"] = o.folds;
  j["fold_accuracy"] = a.fold_accuracy;
  j["fold_size"] = a.fold_size;
  j["folds_not_converged"] = a.folds_not_converged;
  j["l2"] = o.l2;
  Json fit;
  fit["converged"] = a.converged;
  fit["outcome"] = a.outcome;
  if (!a.message.empty()) fit["message"] = a.message;
  fit["iterations"] = a.iterations;
  fit["training_accuracy"] = a.training_accuracy;
  Json w = Json::array();
  for (size_t k = 0; k < a.features.size(); ++k) {
    Json e;
    e["feature"] = a.features[k];
    e["weight"] = a.weights[k];
    if (k < a.std_errors.size()) e["std_error"] = a.std_errors[k];
    else e["std_error"] = nullptr;
    w.push_back(std::move(e));
  }
  fit["weights"] = std::move(w);
  fit["features_not_varying"] = a.not_varying;
  j["fit"] = std::move(fit);
}

}  // namespace prefsift::bias
