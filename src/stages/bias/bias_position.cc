#include "stages/bias/bias_position.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <map>
#include <numeric>
#include <unordered_map>
#include <utility>

#include "stats/hypothesis_tests.h"
#include "stats/rank_correlation.h"

namespace prefsift::bias {
namespace {

using Json = nlohmann::ordered_json;

// Runs the uniform-slot test on one group's counts.
void RunTest(SlotTest* t) {
  t->n = std::accumulate(t->counts.begin(), t->counts.end(), uint64_t{0});
  if (t->n == 0) return;
  if (t->b == 2) {
    // Exact two-sided binomial test of slot 0 against 1/2 (methods.md section 6, common practice).
    t->statistic = static_cast<double>(t->counts[0]) / static_cast<double>(t->n);
    t->p = stats::BinomTestTwoSided(t->counts[0], t->n, 0.5);
  } else {
    // Pearson chi-square goodness of fit against uniform 1/B, df = B - 1.
    stats::ChiSquareResult r = stats::ChiSquareUniform(t->counts);
    t->statistic = r.statistic;
    t->p = r.p;
  }
  t->p_adjusted = t->p;
}

void AdjustTests(std::vector<SlotTest>* tests, const PositionOptions& o) {
  std::vector<double> p;
  for (const auto& t : *tests) {
    if (t.tested) p.push_back(t.p);
  }
  std::vector<double> adj = AdjustFamily(p, o.correction);
  size_t k = 0;
  for (auto& t : *tests) {
    if (!t.tested) continue;
    t.p_adjusted = adj[k++];
    t.significant = t.p_adjusted <= o.alpha;
  }
}

// Groups (key, B) -> counts, tested when n >= min.
std::vector<SlotTest> GroupTests(const std::map<std::pair<std::string, uint32_t>, std::vector<uint64_t>>& groups,
                                 const PositionOptions& o, uint64_t* untested) {
  std::vector<SlotTest> out;
  for (const auto& [key, counts] : groups) {
    SlotTest t;
    t.group = key.first;
    t.b = key.second;
    t.counts = counts;
    RunTest(&t);
    t.tested = t.n >= o.min_group_records;
    if (!t.tested) ++*untested;
    out.push_back(std::move(t));
  }
  AdjustTests(&out, o);
  return out;
}

Json TestJson(const SlotTest& t, bool with_group, const char* group_key) {
  Json j;
  if (with_group) j[group_key] = t.group;
  j["candidates"] = t.b;
  j["records"] = t.n;
  j["chosen_slot_counts"] = t.counts;
  Json shares = Json::array();
  for (uint64_t c : t.counts) shares.push_back(t.n ? static_cast<double>(c) / static_cast<double>(t.n) : 0.0);
  j["chosen_slot_shares"] = std::move(shares);
  if (!t.tested) {
    j["tested"] = false;
    return j;
  }
  if (t.b == 2) {
    j["test"] = "binomial-two-sided";
  } else {
    j["test"] = "chi-square-uniform";
    j["chi_square"] = t.statistic;
    j["df"] = t.b - 1;
    // The chi-square approximation wants expected counts >= 5 (common practice); reported, not enforced.
    j["expected_per_slot"] = static_cast<double>(t.n) / static_cast<double>(t.b);
  }
  j["p"] = t.p;
  j["p_adjusted"] = t.p_adjusted;
  j["significant"] = t.significant;
  return j;
}

Json FamilyJson(const std::vector<SlotTest>& tests, const char* group_key, uint64_t untested) {
  Json j;
  Json flagged = Json::array();
  for (const auto& t : tests) {
    if (t.significant) flagged.push_back(t.group);
  }
  j["significant"] = std::move(flagged);
  j["groups_tested"] = tests.size() - untested;
  j["groups_too_small"] = untested;
  Json all = Json::array();
  for (const auto& t : tests) all.push_back(TestJson(t, true, group_key));
  j["groups"] = std::move(all);
  return j;
}

}  // namespace

PositionStats ComputePositionStats(const RunState& st, const std::vector<size_t>& records,
                                   const std::vector<std::vector<uint32_t>>* new_slot_of,
                                   const PositionOptions& o) {
  PositionStats s;
  std::map<uint32_t, std::vector<uint64_t>> by_b;
  // Per (annotator or source text id, B) first, named once at the end.
  std::unordered_map<uint64_t, std::vector<uint64_t>> by_ann_id, by_src_id;
  auto id_key = [](uint32_t id, uint32_t b) { return (static_cast<uint64_t>(id) << 32) | b; };
  std::vector<double> rank_slot, rank_value;
  for (size_t r : records) {
    const RecordFacts& f = st.records[r];
    ++s.records;
    if (!HasSlots(f)) {
      ++s.pairwise_excluded;
      continue;
    }
    const uint32_t b = static_cast<uint32_t>(f.cands.size());
    const std::vector<uint32_t>* moved =
        new_slot_of && r < new_slot_of->size() && !(*new_slot_of)[r].empty() ? &(*new_slot_of)[r] : nullptr;
    auto slot_of = [&](size_t i) { return moved ? (*moved)[i] : static_cast<uint32_t>(i); };
    if (f.shape == JudgmentShape::kRanks || f.shape == JudgmentShape::kOrder) {
      ++s.ranking_records;
      for (size_t i = 0; i < f.cands.size(); ++i) {
        rank_slot.push_back(static_cast<double>(slot_of(i)));
        rank_value.push_back(static_cast<double>(f.cands[i].rank));
      }
    }
    if (f.chosen < 0) {
      ++s.tied_top_excluded;
      continue;
    }
    ++s.with_slot;
    const uint32_t slot = slot_of(static_cast<size_t>(f.chosen));
    auto bump = [&](std::vector<uint64_t>& v) {
      if (v.empty()) v.assign(b, 0);
      ++v[slot];
    };
    bump(by_b[b]);
    if (f.annotator_id != 0) bump(by_ann_id[id_key(f.annotator_id, b)]);
    if (f.source_id != 0) bump(by_src_id[id_key(f.source_id, b)]);
  }
  std::map<std::pair<std::string, uint32_t>, std::vector<uint64_t>> by_ann, by_src;  // by name: the report's order
  for (auto& [k, v] : by_ann_id) by_ann.emplace(std::make_pair(st.Text(static_cast<uint32_t>(k >> 32)), static_cast<uint32_t>(k)), std::move(v));
  for (auto& [k, v] : by_src_id) by_src.emplace(std::make_pair(st.Text(static_cast<uint32_t>(k >> 32)), static_cast<uint32_t>(k)), std::move(v));
  for (const auto& [b, counts] : by_b) {
    SlotTest t;
    t.b = b;
    t.counts = counts;
    RunTest(&t);
    t.tested = t.n > 0;
    s.overall.push_back(std::move(t));
  }
  AdjustTests(&s.overall, o);
  s.by_annotator = GroupTests(by_ann, o, &s.annotator_groups_untested);
  s.by_source = GroupTests(by_src, o, &s.source_groups_untested);
  s.ranking_candidates = rank_slot.size();
  if (rank_slot.size() >= 3) {
    stats::Spearman sp = stats::SpearmanRank(rank_slot, rank_value);
    if (sp.rho == sp.rho) {
      s.slot_rank_defined = true;
      s.slot_rank_rho = sp.rho;
      s.slot_rank_p = sp.p;
    }
  }
  return s;
}

void PositionStatsToJson(const PositionStats& s, const PositionOptions& o, Json* out) {
  Json& j = *out;
  j["records"] = s.records;
  j["records_with_a_chosen_slot"] = s.with_slot;
  j["pairwise_layout_excluded"] = s.pairwise_excluded;
  j["tied_top_excluded"] = s.tied_top_excluded;
  Json overall = Json::array();
  for (const auto& t : s.overall) overall.push_back(TestJson(t, false, ""));
  j["by_candidates"] = std::move(overall);
  j["by_annotator"] = FamilyJson(s.by_annotator, "annotator", s.annotator_groups_untested);
  j["by_source"] = FamilyJson(s.by_source, "source", s.source_groups_untested);
  Json rk;
  rk["records"] = s.ranking_records;
  rk["candidates"] = s.ranking_candidates;
  if (s.slot_rank_defined) {
    rk["spearman_slot_rank"] = s.slot_rank_rho;
    rk["p"] = s.slot_rank_p;
  } else {
    rk["spearman_slot_rank"] = nullptr;
  }
  j["rankings"] = std::move(rk);
  (void)o;
}

std::vector<std::vector<uint32_t>> AssignBalancedSlots(const RunState& st, const std::vector<size_t>& records,
                                                       uint64_t seed) {
  std::vector<std::vector<uint32_t>> out(st.records.size());
  // (B) -> (hash, record)
  std::map<uint32_t, std::vector<std::pair<uint64_t, size_t>>> groups;
  for (size_t r : records) {
    const RecordFacts& f = st.records[r];
    if (!HasSlots(f) || f.chosen < 0) continue;
    groups[static_cast<uint32_t>(f.cands.size())].emplace_back(SeededHash(seed, "position", f.id), r);
  }
  for (auto& [b, members] : groups) {
    std::sort(members.begin(), members.end());
    for (size_t k = 0; k < members.size(); ++k) {
      const size_t r = members[k].second;
      const RecordFacts& f = st.records[r];
      const uint32_t target = static_cast<uint32_t>(k % b);
      // The other candidates, in file order, shuffled (Fisher-Yates) by a
      // stream seeded from the record's hash.
      std::vector<uint32_t> others;
      for (uint32_t i = 0; i < b; ++i) {
        if (static_cast<int>(i) != f.chosen) others.push_back(i);
      }
      uint64_t state = members[k].first;
      for (size_t i = others.size(); i > 1; --i) {
        size_t j = static_cast<size_t>(UniformBelow(&state, i));
        std::swap(others[i - 1], others[j]);
      }
      std::vector<uint32_t> slot(b);
      slot[static_cast<size_t>(f.chosen)] = target;
      size_t next = 0;
      for (uint32_t s2 = 0; s2 < b; ++s2) {
        if (s2 == target) continue;
        slot[others[next++]] = s2;
      }
      out[r] = std::move(slot);
    }
  }
  return out;
}

}  // namespace prefsift::bias
