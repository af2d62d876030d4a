// Conditional-logit choice model: objective, Newton fit, accuracy and k-fold
// cross-validation; see choice_model.h. Pure, thread-safe.
//
// Numerical notes:
//  - Each comparison is evaluated on differences z_j = x_j - x_c (chosen row),
//    so s_j = w . z_j, s_c = 0 and -log P(c) = logsumexp_j s_j, computed as
//    M + log1p(sum_{j != argmax} exp(s_j - M)): no overflow for huge scores
//    and full precision when the chosen candidate dominates.
//  - Gradient = sum_i E_P[z] and Hessian = sum_i Cov_P(z), the covariance
//    taken around its mean (never E[zz'] - E[z]E[z]'), so large feature
//    offsets do not cancel catastrophically.
#include "stats/choice_model.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>
#include <memory>
#include <numeric>
#include <utility>

#include "core/random.h"
#include "core/thread_pool.h"

namespace prefsift::stats {
namespace {

using Matrix = std::vector<double>;  // row-major d x d

std::string Num(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.3g", v);
  return buf;
}

Status Validate(const ChoiceData& data, const ChoiceFitOptions& options) {
  const size_t d = data.dim > 0 ? static_cast<size_t>(data.dim) : 0;
  if (d == 0) return Status::Input("choice model: dim must be >= 1");
  const size_t n = data.chosen.size();
  if (n == 0) return Status::Input("choice model: no comparisons");
  if (data.offsets.size() != n + 1 || data.offsets[0] != 0) {
    return Status::Input("choice model: offsets must have one entry per comparison plus one, from 0");
  }
  if (data.features.size() != data.offsets.back() * d) {
    return Status::Input("choice model: features size does not match offsets x dim");
  }
  if (!data.group.empty() && data.group.size() != n) {
    return Status::Input("choice model: group must be empty or have one id per comparison");
  }
  for (size_t i = 0; i < n; ++i) {
    if (data.offsets[i + 1] < data.offsets[i] + 2) {
      return Status::Input("choice model: comparison " + std::to_string(i) +
                           " has fewer than 2 candidates");
    }
    if (data.chosen[i] >= data.offsets[i + 1] - data.offsets[i]) {
      return Status::Input("choice model: comparison " + std::to_string(i) +
                           " chosen index out of range");
    }
  }
  for (size_t j = 0; j < data.features.size(); ++j) {
    if (!std::isfinite(data.features[j])) {
      return Status::Input("choice model: feature " + std::to_string(j % d) + " of candidate row " +
                           std::to_string(j / d) + " is not finite");
    }
  }
  if (!std::isfinite(options.l2) || options.l2 < 0.0) {
    return Status::Input("choice model: l2 must be finite and >= 0");
  }
  return Status::Ok();
}

// Objective over a subset of comparisons (all when subset is null).
// Hessian is only filled when want_hessian.
// `features` is data.features or a rescaled copy of its rows (FitOnSubset).
ChoiceObjective Evaluate(const ChoiceData& data, const double* features, const std::vector<size_t>* subset,
                         const std::vector<double>& w, double l2, bool want_hessian) {
  const size_t d = static_cast<size_t>(data.dim);
  ChoiceObjective out;
  out.gradient.assign(d, 0.0);
  if (want_hessian) out.hessian.assign(d * d, 0.0);
  std::vector<double> z, s, prob, mean(d);
  const size_t count = subset ? subset->size() : data.size();
  double nll = 0.0;
  for (size_t idx = 0; idx < count; ++idx) {
    const size_t i = subset ? (*subset)[idx] : idx;
    const size_t begin = data.offsets[i];
    const size_t b = data.offsets[i + 1] - begin;
    const double* xc = &features[(begin + data.chosen[i]) * d];
    z.resize(b * d);
    s.resize(b);
    prob.resize(b);
    size_t arg = 0;
    for (size_t j = 0; j < b; ++j) {
      const double* xj = &features[(begin + j) * d];
      double sj = 0.0;
      for (size_t f = 0; f < d; ++f) {
        z[j * d + f] = xj[f] - xc[f];
        sj += w[f] * z[j * d + f];
      }
      s[j] = sj;
      if (s[j] > s[arg]) arg = j;
    }
    const double m = s[arg];
    double rest = 0.0;
    for (size_t j = 0; j < b; ++j) {
      prob[j] = std::exp(s[j] - m);
      if (j != arg) rest += prob[j];
    }
    nll += m + std::log1p(rest);
    const double total = 1.0 + rest;
    std::fill(mean.begin(), mean.end(), 0.0);
    for (size_t j = 0; j < b; ++j) {
      prob[j] /= total;
      for (size_t f = 0; f < d; ++f) mean[f] += prob[j] * z[j * d + f];
    }
    for (size_t f = 0; f < d; ++f) out.gradient[f] += mean[f];
    if (want_hessian) {
      for (size_t j = 0; j < b; ++j) {
        for (size_t f = 0; f < d; ++f) {
          const double uf = z[j * d + f] - mean[f];
          if (uf == 0.0) continue;
          const double pu = prob[j] * uf;
          for (size_t g = 0; g <= f; ++g) out.hessian[f * d + g] += pu * (z[j * d + g] - mean[g]);
        }
      }
    }
  }
  double sq = 0.0;
  for (size_t f = 0; f < d; ++f) {
    sq += w[f] * w[f];
    out.gradient[f] += l2 * w[f];
  }
  out.value = nll + 0.5 * l2 * sq;
  if (want_hessian) {
    for (size_t f = 0; f < d; ++f) {
      out.hessian[f * d + f] += l2;
      for (size_t g = 0; g < f; ++g) out.hessian[g * d + f] = out.hessian[f * d + g];
    }
  }
  return out;
}

double NllOnly(const ChoiceData& data, const double* features, const std::vector<size_t>* subset,
               const std::vector<double>& w, double l2) {
  // Cheap enough to reuse Evaluate without the Hessian.
  return Evaluate(data, features, subset, w, l2, false).value;
}

// Cholesky factorisation in place (lower triangle). False if not positive
// definite (a pivot <= floor).
bool Cholesky(Matrix& a, size_t d, double floor) {
  for (size_t j = 0; j < d; ++j) {
    double diag = a[j * d + j];
    for (size_t k = 0; k < j; ++k) diag -= a[j * d + k] * a[j * d + k];
    if (!(diag > floor)) return false;
    const double root = std::sqrt(diag);
    a[j * d + j] = root;
    for (size_t i = j + 1; i < d; ++i) {
      double v = a[i * d + j];
      for (size_t k = 0; k < j; ++k) v -= a[i * d + k] * a[j * d + k];
      a[i * d + j] = v / root;
    }
  }
  return true;
}

std::vector<double> CholeskySolve(const Matrix& l, size_t d, std::vector<double> b) {
  for (size_t i = 0; i < d; ++i) {
    for (size_t k = 0; k < i; ++k) b[i] -= l[i * d + k] * b[k];
    b[i] /= l[i * d + i];
  }
  for (size_t i = d; i-- > 0;) {
    for (size_t k = i + 1; k < d; ++k) b[i] -= l[k * d + i] * b[k];
    b[i] /= l[i * d + i];
  }
  return b;
}

// Cyclic Jacobi eigen-decomposition of a symmetric matrix. Returns
// eigenvalues; `vectors` gets the eigenvectors as columns.
std::vector<double> SymmetricEigen(Matrix a, size_t d, Matrix& vectors) {
  vectors.assign(d * d, 0.0);
  for (size_t i = 0; i < d; ++i) vectors[i * d + i] = 1.0;
  for (int sweep = 0; sweep < 100; ++sweep) {
    double off = 0.0;
    for (size_t p = 0; p < d; ++p)
      for (size_t q = p + 1; q < d; ++q) off += a[p * d + q] * a[p * d + q];
    if (off < 1e-300) break;
    for (size_t p = 0; p < d; ++p) {
      for (size_t q = p + 1; q < d; ++q) {
        const double apq = a[p * d + q];
        if (apq == 0.0) continue;
        const double theta = (a[q * d + q] - a[p * d + p]) / (2.0 * apq);
        const double t = (theta >= 0 ? 1.0 : -1.0) / (std::fabs(theta) + std::sqrt(theta * theta + 1.0));
        const double c = 1.0 / std::sqrt(t * t + 1.0);
        const double sn = t * c;
        for (size_t k = 0; k < d; ++k) {
          const double akp = a[k * d + p], akq = a[k * d + q];
          a[k * d + p] = c * akp - sn * akq;
          a[k * d + q] = sn * akp + c * akq;
        }
        for (size_t k = 0; k < d; ++k) {
          const double apk = a[p * d + k], aqk = a[q * d + k];
          a[p * d + k] = c * apk - sn * aqk;
          a[q * d + k] = sn * apk + c * aqk;
        }
        for (size_t k = 0; k < d; ++k) {
          const double vkp = vectors[k * d + p], vkq = vectors[k * d + q];
          vectors[k * d + p] = c * vkp - sn * vkq;
          vectors[k * d + q] = sn * vkp + c * vkq;
        }
      }
    }
  }
  std::vector<double> values(d);
  for (size_t i = 0; i < d; ++i) values[i] = a[i * d + i];
  return values;
}

// The feature rows of the comparisons in `subset` (all when null) divided per
// column by `scale`, at their places in data.features; rows of comparisons
// outside the subset are left unset (never read), so their pages are never
// touched.
// The subset's rows divided by `scale`, written into *out (resized to the
// size of data.features; rows outside the subset are left as they were and
// never read). A caller running several fits passes one buffer per thread, so
// a fit after the first writes into memory already faulted in.
void RescaledRows(const ChoiceData& data, const std::vector<size_t>* subset, const std::vector<double>& scale,
                  std::vector<double>* out) {
  const size_t d = static_cast<size_t>(data.dim);
  out->resize(data.features.size());
  double* o = out->data();
  const size_t count = subset ? subset->size() : data.size();
  for (size_t idx = 0; idx < count; ++idx) {
    const size_t i = subset ? (*subset)[idx] : idx;
    for (size_t r = data.offsets[i]; r < data.offsets[i + 1]; ++r)
      for (size_t f = 0; f < d; ++f) o[r * d + f] = data.features[r * d + f] / scale[f];
  }
}
// After the iterations: is there a direction v in which the Hessian (unit-
// normalised by its value at w = 0) is numerically singular? If so, say
// whether v separates the data (v . (x_c - x_j) of one sign everywhere) or
// does not vary within any comparison (not identified).
ChoiceFitOutcome Diagnose(const ChoiceData& data, const double* features, const std::vector<size_t>* subset,
                          const Matrix& h_end, const Matrix& h_zero) {
  const size_t d = static_cast<size_t>(data.dim);
  std::vector<double> unit(d);
  for (size_t f = 0; f < d; ++f) {
    const double h0 = h_zero[f * d + f];
    if (!(h0 > 0.0)) return ChoiceFitOutcome::kNotIdentified;  // feature never varies
    unit[f] = 1.0 / std::sqrt(h0);
  }
  Matrix scaled(d * d);
  for (size_t f = 0; f < d; ++f)
    for (size_t g = 0; g < d; ++g) scaled[f * d + g] = h_end[f * d + g] * unit[f] * unit[g];
  Matrix vecs;
  const std::vector<double> vals = SymmetricEigen(scaled, d, vecs);
  const size_t k = static_cast<size_t>(std::min_element(vals.begin(), vals.end()) - vals.begin());
  const double vmax = *std::max_element(vals.begin(), vals.end());
  if (!(vals[k] <= 1e-9 * std::max(vmax, 1e-300))) return ChoiceFitOutcome::kConverged;
  std::vector<double> v(d);
  for (size_t f = 0; f < d; ++f) v[f] = vecs[f * d + k] * unit[f];
  // Projections of x_c - x_j on v.
  double max_abs = 0.0, min_proj = 0.0, max_proj = 0.0;
  const size_t count = subset ? subset->size() : data.size();
  for (size_t idx = 0; idx < count; ++idx) {
    const size_t i = subset ? (*subset)[idx] : idx;
    const size_t begin = data.offsets[i];
    const double* xc = &features[(begin + data.chosen[i]) * d];
    for (size_t j = begin; j < data.offsets[i + 1]; ++j) {
      double proj = 0.0;
      for (size_t f = 0; f < d; ++f) proj += v[f] * (xc[f] - features[j * d + f]);
      max_abs = std::max(max_abs, std::fabs(proj));
      min_proj = std::min(min_proj, proj);
      max_proj = std::max(max_proj, proj);
    }
  }
  double vnorm = 0.0;
  for (size_t f = 0; f < d; ++f) vnorm += std::fabs(v[f]);
  if (max_abs <= 1e-12 * vnorm) return ChoiceFitOutcome::kNotIdentified;
  const double tol = 1e-6 * max_abs;
  if (min_proj >= -tol || max_proj <= tol) return ChoiceFitOutcome::kSeparated;
  return ChoiceFitOutcome::kNotIdentified;
}

// `scratch` (may be null) holds the rescaled rows; see RescaledRows.
Result<ChoiceFit> FitOnSubset(const ChoiceData& raw, const std::vector<size_t>* subset,
                              const ChoiceFitOptions& options, std::vector<double>* scratch) {
  const size_t d = static_cast<size_t>(raw.dim);
  std::vector<double> scale(d, 1.0);
  if (options.standardize) {
    // Population sd of each feature over all candidate rows of the subset.
    std::vector<double> mean(d, 0.0), m2(d, 0.0);
    double rows = 0.0;
    const size_t count = subset ? subset->size() : raw.size();
    for (size_t idx = 0; idx < count; ++idx) {
      const size_t i = subset ? (*subset)[idx] : idx;
      for (size_t r = raw.offsets[i]; r < raw.offsets[i + 1]; ++r) {
        rows += 1.0;
        for (size_t f = 0; f < d; ++f) {  // Welford
          const double x = raw.features[r * d + f];
          const double delta = x - mean[f];
          mean[f] += delta / rows;
          m2[f] += delta * (x - mean[f]);
        }
      }
    }
    for (size_t f = 0; f < d; ++f) {
      const double sd = std::sqrt(m2[f] / rows);
      if (sd > 0.0 && std::isfinite(sd)) scale[f] = sd;
    }
  }
  // The fit reads rescaled rows of the subset only (no copy of the rest).
  std::vector<double> own;
  if (!scratch) scratch = &own;
  const double* features = raw.features.data();
  if (options.standardize) {
    RescaledRows(raw, subset, scale, scratch);
    features = scratch->data();
  }
  const double l2 = options.l2;
  const size_t count = subset ? subset->size() : raw.size();

  std::vector<double> w(d, 0.0);
  ChoiceObjective cur = Evaluate(raw, features, subset, w, l2, true);
  const Matrix h_zero = cur.hessian;
  double trace0 = 0.0;
  for (size_t f = 0; f < d; ++f) trace0 += h_zero[f * d + f];
  const double pivot_floor = 1e-13 * std::max(trace0 / static_cast<double>(d), 1e-300);

  ChoiceFit fit;
  bool stopped_converged = false;
  bool separated_early = false;
  int it = 0;
  for (; it < options.max_iterations; ++it) {
    // Newton direction from (H + mu I), mu raised until positive definite.
    std::vector<double> neg_g(d);
    for (size_t f = 0; f < d; ++f) neg_g[f] = -cur.gradient[f];
    std::vector<double> step;
    double mu = 0.0;
    for (int attempt = 0; attempt < 60; ++attempt) {
      Matrix l = cur.hessian;
      for (size_t f = 0; f < d; ++f) l[f * d + f] += mu;
      if (Cholesky(l, d, pivot_floor)) {
        step = CholeskySolve(l, d, neg_g);
        break;
      }
      mu = mu == 0.0 ? pivot_floor * 10.0 : mu * 10.0;
    }
    if (step.empty()) break;
    double decrement = 0.0;  // g' (H + mu I)^-1 g
    for (size_t f = 0; f < d; ++f) decrement -= cur.gradient[f] * step[f];
    if (decrement <= 0.0) {
      stopped_converged = true;
      break;
    }
    const double floor_value = std::max(cur.value, 1e-300);
    if (0.5 * decrement <= 1e-10 * floor_value) {
      // Quadratic regime: the predicted drop is below what the objective can
      // resolve, so take the full Newton step without a line search.
      for (size_t f = 0; f < d; ++f) w[f] += step[f];
      cur = Evaluate(raw, features, subset, w, l2, true);
      if (0.5 * decrement <= options.tolerance * floor_value) {
        stopped_converged = true;
        ++it;
        break;
      }
      continue;
    }
    // Backtracking line search (Armijo, c = 1e-4).
    double t = 1.0;
    std::vector<double> trial(d);
    bool moved = false;
    for (int half = 0; half < 60; ++half) {
      for (size_t f = 0; f < d; ++f) trial[f] = w[f] + t * step[f];
      if (NllOnly(raw, features, subset, trial, l2) <= cur.value - 1e-4 * t * decrement) {
        moved = true;
        break;
      }
      t *= 0.5;
    }
    if (!moved) break;  // no decrease possible: reported as not converged
    w = trial;
    cur = Evaluate(raw, features, subset, w, l2, true);
    if (l2 == 0.0 && cur.value <= 1e-10 * static_cast<double>(count)) {
      separated_early = true;  // every chosen candidate already has P > 1 - 1e-10
      ++it;
      break;
    }
  }

  fit.iterations = it;
  fit.fitted_scale_weights = w;
  fit.weights.resize(d);
  for (size_t f = 0; f < d; ++f) fit.weights[f] = w[f] / scale[f];
  fit.objective = cur.value;
  double sq = 0.0;
  for (double x : w) sq += x * x;
  fit.nll = cur.value - 0.5 * l2 * sq;
  fit.gradient_norm = 0.0;
  for (double g : cur.gradient) fit.gradient_norm = std::max(fit.gradient_norm, std::fabs(g));

  ChoiceFitOutcome outcome = stopped_converged ? ChoiceFitOutcome::kConverged
                                               : ChoiceFitOutcome::kMaxIterations;
  if (separated_early) outcome = ChoiceFitOutcome::kSeparated;
  if (l2 == 0.0) {
    const ChoiceFitOutcome diag = Diagnose(raw, features, subset, cur.hessian, h_zero);
    if (diag != ChoiceFitOutcome::kConverged) outcome = diag;
  }
  if (outcome == ChoiceFitOutcome::kConverged) {
    Matrix l = cur.hessian;
    if (Cholesky(l, d, 0.0)) {
      fit.std_errors.resize(d);
      for (size_t f = 0; f < d; ++f) {
        std::vector<double> e(d, 0.0);
        e[f] = 1.0;
        const std::vector<double> col = CholeskySolve(l, d, e);
        fit.std_errors[f] = std::sqrt(col[f]) / scale[f];
      }
    } else {
      outcome = ChoiceFitOutcome::kNotIdentified;
    }
  }
  fit.outcome = outcome;
  fit.converged = outcome == ChoiceFitOutcome::kConverged;
  switch (outcome) {
    case ChoiceFitOutcome::kConverged:
      fit.message = "converged after " + std::to_string(it) + " Newton iterations";
      break;
    case ChoiceFitOutcome::kSeparated:
      fit.message =
          "not converged: the choices are (quasi-)separable by the features, so the "
          "maximum-likelihood weights are infinite; the weights shown are the last iterate "
          "(norm growing). Set an L2 penalty (l2 > 0) to get finite weights";
      break;
    case ChoiceFitOutcome::kNotIdentified:
      fit.message =
          "not identified: some feature or combination of features does not vary within any "
          "comparison (constant or collinear), so its weight cannot be estimated; drop it or "
          "set l2 > 0";
      break;
    case ChoiceFitOutcome::kMaxIterations:
      fit.message = "not converged after " + std::to_string(it) +
                    " Newton iterations (gradient max-norm " + Num(fit.gradient_norm) + ")";
      break;
  }
  return fit;
}

// Uniform integer in [0, bound) by rejection (no modulo bias). Unlike
// UniformBelow it draws once even when bound is 1, which the fold shuffles'
// streams depend on (changing it would change every fit).
uint64_t Below(uint64_t bound, uint64_t& state) {
  const uint64_t limit = std::numeric_limits<uint64_t>::max() -
                         std::numeric_limits<uint64_t>::max() % bound;
  uint64_t r;
  do {
    r = SplitMix64(&state);
  } while (r >= limit);
  return r % bound;
}

double Credit(const ChoiceData& data, size_t i, const std::vector<double>& w) {
  const size_t d = static_cast<size_t>(data.dim);
  double best = -std::numeric_limits<double>::infinity();
  size_t tied = 0;
  bool chosen_best = false;
  for (size_t j = data.offsets[i]; j < data.offsets[i + 1]; ++j) {
    double score = 0.0;
    for (size_t f = 0; f < d; ++f) score += w[f] * data.features[j * d + f];
    const bool is_chosen = j - data.offsets[i] == data.chosen[i];
    if (score > best) {
      best = score;
      tied = 1;
      chosen_best = is_chosen;
    } else if (score == best) {
      ++tied;
      chosen_best = chosen_best || is_chosen;
    }
  }
  return chosen_best ? 1.0 / static_cast<double>(tied) : 0.0;
}

}  // namespace

void ChoiceData::Add(const std::vector<double>& rows, uint32_t chosen_index) {
  features.insert(features.end(), rows.begin(), rows.end());
  const size_t b = dim > 0 ? rows.size() / static_cast<size_t>(dim) : 0;
  offsets.push_back(offsets.back() + b);
  chosen.push_back(chosen_index);
}

ChoiceObjective EvaluateChoiceObjective(const ChoiceData& data, const std::vector<double>& w,
                                        double l2) {
  return Evaluate(data, data.features.data(), nullptr, w, l2, true);
}

Result<ChoiceFit> FitChoiceModel(const ChoiceData& data, const ChoiceFitOptions& options) {
  if (Status s = Validate(data, options); !s.ok()) return s;
  return FitOnSubset(data, nullptr, options, nullptr);
}

double ChoiceAccuracy(const ChoiceData& data, const std::vector<double>& w) {
  if (data.size() == 0) return 0.0;
  double credit = 0.0;
  for (size_t i = 0; i < data.size(); ++i) credit += Credit(data, i, w);
  return credit / static_cast<double>(data.size());
}

namespace {

// The fold of each comparison: groups (ChoiceData::group, or each comparison)
// sorted, shuffled from `seed`, dealt round-robin. Errors: folds < 2, or fewer
// groups than folds.
Result<std::vector<int>> FoldsOf(const ChoiceData& data, int folds, uint64_t seed, ThreadPool& pool) {
  if (folds < 2) return Status::Input("cross-validation: folds must be >= 2");
  const size_t n = data.size();
  // Distinct groups, sorted, so the assignment does not depend on input order
  // of groups beyond their ids.
  std::vector<uint64_t> ids(n);
  for (size_t i = 0; i < n; ++i) ids[i] = data.group.empty() ? i : data.group[i];
  std::vector<uint64_t> units = ids;
  std::sort(units.begin(), units.end());
  units.erase(std::unique(units.begin(), units.end()), units.end());
  if (units.size() < static_cast<size_t>(folds)) {
    return Status::Input("cross-validation: " + std::to_string(units.size()) +
                         " groups is fewer than " + std::to_string(folds) + " folds");
  }
  uint64_t state = seed;
  for (size_t i = units.size(); i > 1; --i) {  // Fisher-Yates
    const size_t j = static_cast<size_t>(Below(i, state));
    std::swap(units[i - 1], units[j]);
  }
  std::vector<std::pair<uint64_t, int>> fold_of(units.size());
  for (size_t r = 0; r < units.size(); ++r)
    fold_of[r] = {units[r], static_cast<int>(r % static_cast<size_t>(folds))};
  std::sort(fold_of.begin(), fold_of.end());
  std::vector<int> fold(n);  // each comparison looked up on its own: in parallel
  pool.ParallelFor(n, [&](size_t i, unsigned) {
    fold[i] = std::lower_bound(fold_of.begin(), fold_of.end(), std::make_pair(ids[i], -1))->second;
  });
  return fold;
}

struct FoldResult {
  Status status = Status::Ok();
  bool converged = false;
  double credit = 0.0;
  size_t size = 0;
};

// Fold k: fitted on the other folds, credited on its own comparisons.
FoldResult RunFold(const ChoiceData& data, const ChoiceFitOptions& options, const std::vector<int>& fold, int k,
                   std::vector<double>* scratch) {
  FoldResult r;
  std::vector<size_t> train, test;
  for (size_t i = 0; i < fold.size(); ++i) (fold[i] == k ? test : train).push_back(i);
  Result<ChoiceFit> fit = FitOnSubset(data, &train, options, scratch);
  if (!fit.ok()) {
    r.status = fit.status();
    return r;
  }
  r.converged = fit.value().converged;
  for (size_t i : test) r.credit += Credit(data, i, fit.value().weights);
  r.size = test.size();
  return r;
}

// The folds' results combined in fold order, so the sums are the same
// whatever ran them.
Result<CrossValidation> Combine(const std::vector<FoldResult>& results, size_t n) {
  CrossValidation cv;
  double total_credit = 0.0;
  for (const FoldResult& r : results) {
    if (!r.status.ok()) return r.status;
    if (!r.converged) ++cv.folds_not_converged;
    total_credit += r.credit;
    cv.fold_size.push_back(r.size);
    cv.fold_accuracy.push_back(r.size == 0 ? 0.0 : r.credit / static_cast<double>(r.size));
  }
  cv.accuracy = total_credit / static_cast<double>(n);
  return cv;
}

}  // namespace

Result<CrossValidation> CrossValidatedAccuracy(const ChoiceData& data,
                                               const ChoiceFitOptions& options, int folds,
                                               uint64_t seed) {
  if (Status s = Validate(data, options); !s.ok()) return s;
  ThreadPool pool(0);
  auto fold = FoldsOf(data, folds, seed, pool);
  if (!fold.ok()) return fold.status();
  // The folds are independent fits: run them on their own threads (at most one
  // per core at a time), then combine in fold order.
  std::vector<FoldResult> results(static_cast<size_t>(folds));
  std::vector<std::vector<double>> scratch(pool.size());  // one per worker, reused by its fits
  pool.ParallelFor(static_cast<size_t>(folds), [&](size_t k, unsigned worker) {
    results[k] = RunFold(data, options, fold.value(), static_cast<int>(k), &scratch[worker]);
  });
  return Combine(results, data.size());
}

CrossValidatedFit CrossValidateAndFit(const ChoiceData& data, const ChoiceFitOptions& options, int folds,
                                      uint64_t seed, unsigned threads) {
  CrossValidatedFit out;
  if (Status s = Validate(data, options); !s.ok()) {
    out.cv = s;
    out.fit = s;
    return out;
  }
  ThreadPool pool(threads);
  auto fold = FoldsOf(data, folds, seed, pool);
  std::vector<FoldResult> results(fold.ok() ? static_cast<size_t>(folds) : 0);
  // Task 0 is the fit on every comparison (the largest, so it starts first),
  // tasks 1..folds the folds; each task writes only its own result.
  std::vector<std::vector<double>> scratch(pool.size());  // one per worker, reused by its fits
  pool.ParallelFor(results.size() + 1, [&](size_t t, unsigned worker) {
    if (t == 0) {
      out.fit = FitOnSubset(data, nullptr, options, &scratch[worker]);
    } else {
      results[t - 1] = RunFold(data, options, fold.value(), static_cast<int>(t - 1), &scratch[worker]);
    }
  });
  out.cv = fold.ok() ? Combine(results, data.size()) : Result<CrossValidation>(fold.status());
  return out;
}

}  // namespace prefsift::stats
