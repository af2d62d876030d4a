#include "stages/bias/bias_length.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <array>
#include <cmath>
#include <map>
#include <utility>

#include "stats/hypothesis_tests.h"
#include "stats/rank_correlation.h"

namespace prefsift::bias {
namespace {

using Json = nlohmann::ordered_json;

uint64_t LengthOf(const RecordFacts& f, size_t i, LengthUnit u) {
  return u == LengthUnit::kWords ? f.cands[i].words : f.cands[i].chars;
}

size_t BinOf(uint64_t v, const std::vector<uint32_t>& edges) {
  return static_cast<size_t>(std::upper_bound(edges.begin(), edges.end(), v) - edges.begin());
}

// Accumulates one group's sign counts and ratios.
struct Acc {
  SignCount c;
  std::vector<double> ratios;
  void Add(int dir, double ratio) {
    ++c.records;
    if (dir > 0) ++c.longer;
    else if (dir < 0) ++c.shorter;
    else ++c.ties;
    if (ratio >= 0) ratios.push_back(ratio);
  }
  SignCount Finish() {
    const uint64_t untied = c.longer + c.shorter;
    c.share_longer = untied ? static_cast<double>(c.longer) / static_cast<double>(untied) : 0.5;
    // Sign test on the non-tied records (methods.md section 6, common practice).
    c.p = stats::SignTest(c.longer, c.shorter);
    c.p_adjusted = c.p;
    if (!ratios.empty()) {
      double sum = 0;
      for (double r : ratios) sum += r;
      c.mean_ratio = sum / static_cast<double>(ratios.size());
      std::sort(ratios.begin(), ratios.end());
      const size_t m = ratios.size();
      c.median_ratio = m % 2 ? ratios[m / 2] : (ratios[m / 2 - 1] + ratios[m / 2]) / 2;
    }
    return c;
  }
};

void Adjust(std::vector<SignCount*> tests, const LengthOptions& o) {
  std::vector<double> p;
  for (auto* t : tests) {
    if (t->tested) p.push_back(t->p);
  }
  std::vector<double> adj = AdjustFamily(p, o.correction);
  size_t k = 0;
  for (auto* t : tests) {
    if (!t->tested) continue;
    t->p_adjusted = adj[k++];
    t->significant = t->p_adjusted <= o.alpha;
  }
}

std::vector<SignCount> Groups(std::map<std::string, Acc>& m, const LengthOptions& o, uint64_t* untested) {
  std::vector<SignCount> out;
  for (auto& [k, acc] : m) {
    SignCount c = acc.Finish();
    c.group = k;
    c.tested = c.records >= o.min_group_records;
    if (!c.tested) ++*untested;
    out.push_back(std::move(c));
  }
  std::vector<SignCount*> ptrs;
  for (auto& c : out) ptrs.push_back(&c);
  Adjust(ptrs, o);
  return out;
}

Json SignJson(const SignCount& c, const char* group_key) {
  Json j;
  if (group_key) j[group_key] = c.group;
  j["records"] = c.records;
  j["chosen_longer"] = c.longer;
  j["chosen_shorter"] = c.shorter;
  j["same_length"] = c.ties;
  j["chosen_longer_share"] = c.share_longer;
  j["mean_ratio"] = c.mean_ratio;
  j["median_ratio"] = c.median_ratio;
  if (!c.tested) {
    j["tested"] = false;
    return j;
  }
  j["test"] = "sign-test";
  j["p"] = c.p;
  j["p_adjusted"] = c.p_adjusted;
  j["significant"] = c.significant;
  return j;
}

Json FamilyJson(const std::vector<SignCount>& v, const char* key, uint64_t untested) {
  Json j;
  Json sig = Json::array();
  for (const auto& c : v) {
    if (c.significant) sig.push_back(c.group);
  }
  j["significant"] = std::move(sig);
  j["groups_tested"] = v.size() - untested;
  j["groups_too_small"] = untested;
  Json all = Json::array();
  for (const auto& c : v) all.push_back(SignJson(c, key));
  j["groups"] = std::move(all);
  return j;
}

Json HistJson(const std::vector<uint32_t>& edges, const std::vector<uint64_t>& chosen,
              const std::vector<uint64_t>& rejected) {
  Json j;
  Json lower = Json::array();
  lower.push_back(0);
  for (uint32_t e : edges) lower.push_back(e);
  j["bin_lower_bounds"] = std::move(lower);  // bin k is [lower[k], lower[k+1]); the last is open
  j["chosen"] = chosen;
  j["rejected"] = rejected;
  return j;
}

}  // namespace

const char* LengthUnitName(LengthUnit u) { return u == LengthUnit::kWords ? "words" : "characters"; }

const std::vector<uint32_t>& WordBinEdges() {
  static const std::vector<uint32_t> e = {25, 50, 100, 150, 200, 300, 500, 1000};
  return e;
}
const std::vector<uint32_t>& CharBinEdges() {
  static const std::vector<uint32_t> e = {100, 250, 500, 750, 1000, 1500, 2500, 5000};
  return e;
}

int LengthDirection(const RecordFacts& f, LengthUnit unit, double* ratio) {
  const size_t c = static_cast<size_t>(PreferredIndex(f));
  const size_t b = f.cands.size();
  uint64_t others = 0;
  for (size_t i = 0; i < b; ++i) {
    if (i != c) others += LengthOf(f, i, unit);
  }
  const uint64_t chosen = LengthOf(f, c, unit);
  const uint64_t lhs = chosen * (b - 1);
  if (ratio) {
    *ratio = others ? static_cast<double>(lhs) / static_cast<double>(others) : -1.0;
  }
  return lhs > others ? 1 : lhs < others ? -1 : 0;
}

LengthStats ComputeLengthStats(const RunState& st, const std::vector<size_t>& records, uint64_t seed,
                               const LengthOptions& o) {
  LengthStats s;
  Acc words, chars;
  // Per source and per annotator, first by text id (RunState::Text: one id per
  // distinct text), named once at the end.
  std::vector<uint32_t> slot_of[2] = {std::vector<uint32_t>(st.text_count(), UINT32_MAX),
                                      std::vector<uint32_t>(st.text_count(), UINT32_MAX)};
  std::vector<std::pair<uint32_t, Acc>> accs[2];  // 0: sources, 1: annotators
  auto acc_of = [&](int kind, uint32_t id) -> Acc& {
    uint32_t& k = slot_of[kind][id];
    if (k == UINT32_MAX) {
      k = static_cast<uint32_t>(accs[kind].size());
      accs[kind].emplace_back(id, Acc{});
    }
    return accs[kind][k].second;
  };
  std::vector<double> diff, pref;
  s.chosen_words_hist.assign(WordBinEdges().size() + 1, 0);
  s.rejected_words_hist.assign(WordBinEdges().size() + 1, 0);
  s.chosen_chars_hist.assign(CharBinEdges().size() + 1, 0);
  s.rejected_chars_hist.assign(CharBinEdges().size() + 1, 0);
  for (size_t r : records) {
    const RecordFacts& f = st.records[r];
    ++s.records;
    const int c = PreferredIndex(f);
    if (c < 0) {
      ++s.tied_top_excluded;
      continue;
    }
    ++s.compared;
    double rw = -1, rc = -1;
    const int dw = LengthDirection(f, LengthUnit::kWords, &rw);
    const int dc = LengthDirection(f, LengthUnit::kChars, &rc);
    words.Add(dw, rw);
    chars.Add(dc, rc);
    if (f.source_id != 0) acc_of(0, f.source_id).Add(dw, rw);
    if (f.annotator_id != 0) acc_of(1, f.annotator_id).Add(dw, rw);
    const size_t b = f.cands.size();
    for (size_t i = 0; i < b; ++i) {
      const bool is_chosen = static_cast<int>(i) == c;
      ++(is_chosen ? s.chosen_words_hist : s.rejected_words_hist)[BinOf(f.cands[i].words, WordBinEdges())];
      ++(is_chosen ? s.chosen_chars_hist : s.rejected_chars_hist)[BinOf(f.cands[i].chars, CharBinEdges())];
    }
    // Candidate pairs with a preference between them (different ranks);
    // orientation drawn from the seeded stream.
    uint64_t state = SeededHash(seed, "length-pairs", f.id);
    for (size_t a = 0; a < b; ++a) {
      for (size_t q = a + 1; q < b; ++q) {
        int ra = f.shape == JudgmentShape::kPairwise ? (a == 0 ? 1 : 2) : f.cands[a].rank;
        int rq = f.shape == JudgmentShape::kPairwise ? (q == 0 ? 1 : 2) : f.cands[q].rank;
        if (ra == rq) continue;
        size_t x = a, y = q;
        if (SplitMix64(&state) & 1) std::swap(x, y);
        const int rx = x == a ? ra : rq, ry = x == a ? rq : ra;
        diff.push_back(static_cast<double>(f.cands[x].words) - static_cast<double>(f.cands[y].words));
        pref.push_back(rx < ry ? 1.0 : -1.0);
      }
    }
  }
  std::map<std::string, Acc> by_src, by_ann;  // by name: the report's order
  for (auto& [id, acc] : accs[0]) by_src.emplace(st.Text(id), std::move(acc));
  for (auto& [id, acc] : accs[1]) by_ann.emplace(st.Text(id), std::move(acc));
  s.words = words.Finish();
  s.chars = chars.Finish();
  s.words.tested = s.words.records > 0;
  s.chars.tested = s.chars.records > 0;
  Adjust({&s.words, &s.chars}, o);
  s.by_source = Groups(by_src, o, &s.source_groups_untested);
  s.by_annotator = Groups(by_ann, o, &s.annotator_groups_untested);
  s.spearman_pairs = diff.size();
  if (diff.size() >= 3) {
    stats::Spearman sp = stats::SpearmanRank(diff, pref);
    if (sp.rho == sp.rho) {
      s.spearman_defined = true;
      s.spearman_rho = sp.rho;
      s.spearman_p = sp.p;
    }
  }
  return s;
}

void LengthStatsToJson(const LengthStats& s, Json* out) {
  Json& j = *out;
  j["records"] = s.records;
  j["records_compared"] = s.compared;
  j["tied_top_excluded"] = s.tied_top_excluded;
  j["words"] = SignJson(s.words, nullptr);
  j["characters"] = SignJson(s.chars, nullptr);
  Json sp;
  sp["pairs"] = s.spearman_pairs;
  if (s.spearman_defined) {
    sp["rho"] = s.spearman_rho;
    sp["p"] = s.spearman_p;
  } else {
    sp["rho"] = nullptr;
  }
  j["length_difference_vs_preference"] = std::move(sp);
  j["by_source"] = FamilyJson(s.by_source, "source", s.source_groups_untested);
  j["by_annotator"] = FamilyJson(s.by_annotator, "annotator", s.annotator_groups_untested);
  Json h;
  h["words"] = HistJson(WordBinEdges(), s.chosen_words_hist, s.rejected_words_hist);
  h["characters"] = HistJson(CharBinEdges(), s.chosen_chars_hist, s.rejected_chars_hist);
  j["histograms"] = std::move(h);
}

LengthRebalancePlan PlanLengthRebalance(const RunState& st, const std::vector<size_t>& records, uint64_t seed,
                                        const LengthRebalanceOptions& o) {
  LengthRebalancePlan plan;
  const size_t nbins = o.bin_edges.size() + 1;
  plan.bins.resize(nbins);
  struct Item {
    uint64_t hash;
    size_t record;
    double ratio;
  };
  // stratum -> [bin][0 = longer, 1 = shorter]
  std::map<std::string, std::vector<std::array<std::vector<Item>, 2>>> strata;
  for (size_t r : records) {
    const RecordFacts& f = st.records[r];
    if (PreferredIndex(f) < 0) continue;
    double ratio = -1;
    const int dir = LengthDirection(f, o.unit, &ratio);
    if (dir == 0) continue;
    const double dist = ratio > 0 ? std::fabs(std::log2(ratio)) : INFINITY;
    const size_t bin = static_cast<size_t>(std::upper_bound(o.bin_edges.begin(), o.bin_edges.end(), dist) -
                                           o.bin_edges.begin());
    auto& m = strata[o.by_source ? st.Text(f.source_id) : std::string()];
    if (m.empty()) m.resize(nbins);
    m[bin][dir > 0 ? 0 : 1].push_back({SeededHash(seed, "length", f.id), r, ratio});
  }
  auto share = [](uint64_t l, uint64_t s) { return l + s ? static_cast<double>(l) / static_cast<double>(l + s) : 0.5; };
  const double t = o.target;
  for (auto& [name, members] : strata) {
    LengthRebalancePlan::Stratum sr;
    sr.source = name;
    for (const auto& bin : members) {
      sr.longer += bin[0].size();
      sr.shorter += bin[1].size();
    }
    sr.longer_kept = sr.longer;
    sr.shorter_kept = sr.shorter;
    sr.rebalanced = std::fabs(share(sr.longer, sr.shorter) - t) > o.tolerance;
    for (size_t k = 0; k < nbins; ++k) {
      auto& bin = plan.bins[k];
      const uint64_t nl = members[k][0].size(), ns = members[k][1].size();
      bin.longer += nl;
      bin.shorter += ns;
      uint64_t keep_l = nl, keep_s = ns;
      if (sr.rebalanced && nl + ns > 0) {
        const double l = static_cast<double>(nl), s = static_cast<double>(ns);
        if (l / (l + s) > t) {
          keep_l = std::min<uint64_t>(nl, static_cast<uint64_t>(std::llround(t * s / (1 - t))));
        } else {
          keep_s = std::min<uint64_t>(ns, static_cast<uint64_t>(std::llround((1 - t) * l / t)));
        }
        for (int side = 0; side < 2; ++side) {
          const uint64_t keep = side == 0 ? keep_l : keep_s;
          auto& v = members[k][side];
          if (keep >= v.size()) continue;
          std::sort(v.begin(), v.end(), [](const Item& a, const Item& b) {
            return a.hash != b.hash ? a.hash < b.hash : a.record < b.record;
          });
          for (size_t i = keep; i < v.size(); ++i) {
            plan.discard.push_back({v[i].record, k, side == 0 ? 1 : -1, v[i].ratio});
          }
        }
      }
      bin.longer_kept += keep_l;
      bin.shorter_kept += keep_s;
      sr.longer_kept -= nl - keep_l;
      sr.shorter_kept -= ns - keep_s;
    }
    plan.applied = plan.applied || sr.rebalanced;
    plan.longer_before += sr.longer;
    plan.shorter_before += sr.shorter;
    plan.longer_after += sr.longer_kept;
    plan.shorter_after += sr.shorter_kept;
    plan.strata.push_back(std::move(sr));
  }
  std::sort(plan.discard.begin(), plan.discard.end(),
            [](const auto& a, const auto& b) { return a.record < b.record; });
  plan.share_before = share(plan.longer_before, plan.shorter_before);
  plan.share_after = share(plan.longer_after, plan.shorter_after);
  return plan;
}

}  // namespace prefsift::bias
