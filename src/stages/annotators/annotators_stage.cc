#include "stages/annotators/annotators_stage.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <numeric>
#include <unordered_map>

#include "core/json_pointer.h"
#include "core/key_groups.h"
#include "core/thread_pool.h"
#include "core/state_file.h"
#include "io/output_dir.h"
#include "stages/annotators/annotator_time.h"
#include "stages/bias/bias_common.h"
#include "stages/exact/exact_stage.h"
#include "stats/agreement.h"
#include "stats/hypothesis_tests.h"
#include "stats/preference_graph.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr size_t kListed = 50;  // examples listed in summary.json per finding kind (all are in the findings file)

enum class FlaggedPolicy { kReport, kDrop, kWeight };

struct Settings {
  uint32_t replicates = 1000;
  double confidence = 0.95;
  uint64_t min_shared = 20;
  bias::Correction correction = bias::Correction::kHolm;
  double alpha = 0.05;
  double min_shortfall = 0.10;
  FlaggedPolicy flagged = FlaggedPolicy::kReport;
  std::string weight_field;
  bool reject_cycles = false;
  double rushed_fraction = 0.25;
  double session_gap = 1800;
  uint64_t min_gaps = 5;
  unsigned threads = 0;  // the run's --threads (0: one per core); results do not depend on it
};

Json Round(double v, double scale = 1e6) { return std::isnan(v) ? Json(nullptr) : Json(std::round(v * scale) / scale); }

// The value of one judgment for agreement: the position of its single best
// candidate in the comparison's candidates sorted by hash (so the same
// candidate gets the same value whatever its slot); -1 when the top is tied.
int ChosenIdentity(const RecordFacts& f) {
  int best = -1;
  for (size_t i = 0; i < f.cands.size(); ++i) {
    if (f.cands[i].rank != 1) continue;
    if (best >= 0) return -1;
    best = static_cast<int>(i);
  }
  if (best < 0) return -1;
  int pos = 0;
  for (size_t i = 0; i < f.cands.size(); ++i) {
    const auto& h = f.cands[i].hash;
    const auto& b = f.cands[static_cast<size_t>(best)].hash;
    if (h < b || (h == b && static_cast<int>(i) < best)) ++pos;
  }
  return pos;
}

double Median(std::vector<double> v) {
  if (v.empty()) return kNaN;
  std::sort(v.begin(), v.end());
  const size_t m = v.size() / 2;
  return v.size() % 2 ? v[m] : (v[m - 1] + v[m]) / 2.0;
}

struct AgreementFigures {
  stats::AlphaResult alpha;
  stats::Interval interval;
  double pairwise_agreement = kNaN;
};

struct AnnotatorRow {
  uint32_t id = 0;
  uint64_t judgments = 0, shared = 0, agree = 0;
  double rate = kNaN, rest_rate = kNaN, p = kNaN, p_adjusted = kNaN, weight = 1.0;
  bool tested = false, flagged = false;
};

struct Cycle {
  size_t first_record = 0;       // smallest record index of the prompt
  uint32_t candidates = 0;       // candidates in the cycle
  std::vector<size_t> records;   // judgments that support its edges
};

struct Rushed {
  size_t record = 0;
  double seconds = 0, own_median = kNaN, set_median = kNaN;
};

class AnnotatorsStage : public Stage {
 public:
  AnnotatorsStage(Settings s, uint64_t seed, bool timed) : s_(std::move(s)), seed_(seed), timed_layout_(timed) {}
  std::string name() const override { return "annotators"; }
  // Times are kept only when some input's layout has a timestamp (8 bytes a record).
  void Reserve(size_t n) override {
    if (timed_layout_) times_.reserve(n);
  }
  void Grow(size_t n) override {
    if (timed_layout_) times_.resize(n, kNaN);
  }
  void Observe(size_t r, const Record& rec, const RecordFacts&, const MatchText&) override {
    if (!rec.timestamp || r >= times_.size()) return;
    auto t = ParseJudgmentTime(*rec.timestamp);
    times_[r] = t ? *t : -std::numeric_limits<double>::infinity();  // -inf: present but unreadable
  }

  void SaveObserved(StateWriter& out) const override;
  Status AppendObserved(StateReader& in, size_t first_record) override;

  Status Decide(StageContext& ctx) override {
    RunState& st = ctx.run;
    std::vector<size_t> recs;
    for (size_t r = 0; r < st.records.size(); ++r) {
      if (st.IsKept(r)) recs.push_back(r);
    }
    records_ = recs.size();
    BuildUnits(st, recs);
    Agreement(st);
    TestAnnotators(st, recs);
    FindCycles(st, recs);
    FindRushed(st, recs);
    ApplyPolicies(st);
    return Status::Ok();
  }

  void Figures(const RunState&, GateFigures* g) const override {
    // The same values as summary.json's (rounded as there).
    if (!std::isnan(overall_.alpha.alpha)) g->annotator_alpha = std::round(overall_.alpha.alpha * 1e6) / 1e6;
    g->flagged_annotator_share =
        std::round((records_ ? static_cast<double>(flagged_judgments_) / records_ : 0.0) * 1e6) / 1e6;
  }

  void Report(const RunState& st, Json* out) const override {
    Json& j = *out;
    j["records"] = records_;
    Json& ag = j["agreement"];
    ag["judgment_value"] = "the chosen candidate (by identity, not slot); records whose top rank is tied are left out";
    ag["comparisons_judged_twice_or_more"] = overall_.alpha.units;
    ag["judgments_in_them"] = overall_.alpha.values;
    ag["records_with_tied_top"] = tied_top_;
    ag["repeat_judgments_by_same_annotator"] = same_annotator_repeats_;
    AgreementToJson(overall_, &ag);
    ag["bootstrap"] = Json{{"replicates", s_.replicates}, {"confidence", s_.confidence}, {"over", "comparisons"}};
    ag["fleiss_kappa"] = Round(fleiss_);
    ag["fleiss_kappa_note"] = std::isnan(fleiss_) ? "not given: comparisons have different numbers of judgments"
                                                  : "every comparison has the same number of judgments";
    Json by_source = Json::array();
    for (const auto& [src, fig] : by_source_) {
      Json e{{"source", src}, {"comparisons", fig.alpha.units}};
      AgreementToJson(fig, &e);
      by_source.push_back(std::move(e));
    }
    ag["by_source"] = std::move(by_source);

    Json& an = j["annotators"];
    an["distinct"] = annotators_.size();
    an["min_shared"] = s_.min_shared;
    an["tested"] = tested_;
    an["correction"] = bias::CorrectionName(s_.correction);
    an["alpha"] = s_.alpha;
    an["min_shortfall"] = s_.min_shortfall;
    an["rule"] = "a candidate for review agrees with the majority of the others significantly less often than the rest "
                 "of the set (adjusted p <= alpha) and by at least min_shortfall";
    an["rate_of_the_rest"] = "agreement with the majority of the other annotators, pooled over every other annotator";
    an["policy"] = s_.flagged == FlaggedPolicy::kReport ? "report" : s_.flagged == FlaggedPolicy::kDrop ? "drop" : "weight";
    if (s_.flagged == FlaggedPolicy::kWeight) an["weight_field"] = s_.weight_field;
    Json flagged = Json::array();
    for (const auto& a : annotators_) {
      if (a.flagged) flagged.push_back(st.Text(a.id));
    }
    an["candidates_for_review"] = std::move(flagged);
    an["flagged_judgments"] = flagged_judgments_;
    an["flagged_judgment_share"] = Round(records_ ? static_cast<double>(flagged_judgments_) / records_ : 0.0);
    an["dropped"] = dropped_;
    an["weighted"] = weighted_.size();
    Json table = Json::array();
    for (const auto& a : annotators_) {
      Json row{{"annotator", st.Text(a.id)}, {"judgments", a.judgments}, {"shared_comparisons", a.shared},
               {"agree_with_majority", a.agree}, {"rate", Round(a.rate)}};
      if (a.tested) {
        row["rate_of_the_rest"] = Round(a.rest_rate);
        row["p"] = Round(a.p, 1e12);
        row["p_adjusted"] = Round(a.p_adjusted, 1e12);
      }
      row["status"] = a.flagged ? "candidate for review" : a.tested ? "in line" : "too few shared comparisons";
      if (a.flagged && s_.flagged == FlaggedPolicy::kWeight) row["weight"] = Round(a.weight, 1e4);
      table.push_back(std::move(row));
    }
    an["table"] = std::move(table);

    Json& cy = j["cycles"];
    cy["prompts_with_several_judgments"] = prompts_judged_;
    cy["prompts_with_cycle"] = cycles_.size();
    cy["judgments_in_cycles"] = cycle_records_;
    cy["policy"] = s_.reject_cycles ? "reject" : "report";
    cy["rejected"] = cycles_rejected_;
    std::map<std::string, uint64_t> by_ann;
    for (const auto& c : cycles_) {
      for (size_t r : c.records) ++by_ann[AnnotatorName(st, r)];
    }
    cy["judgments_by_annotator"] = by_ann;
    Json list = Json::array();
    for (size_t i = 0; i < cycles_.size() && i < kListed; ++i) list.push_back(CycleJson(st, cycles_[i]));
    cy["listed"] = std::move(list);

    Json& sp = j["speed"];
    sp["records_with_time"] = timed_;
    sp["unreadable_times"] = bad_times_;
    sp["gaps_measured"] = gaps_;
    sp["median_gap_seconds"] = Round(set_median_, 1e3);
    sp["fraction"] = s_.rushed_fraction;
    sp["session_gap_seconds"] = s_.session_gap;
    sp["rule"] = "a judgment is rushed when the time since the same annotator's previous judgment (within a session) is "
                 "below fraction x the annotator's own median gap, or below fraction x the set's median gap "
                 "(common practice; the fraction is a setting, not a published constant)";
    sp["rushed"] = rushed_.size();
    std::map<std::string, uint64_t> rushed_by;
    for (const auto& x : rushed_) ++rushed_by[AnnotatorName(st, x.record)];
    sp["rushed_by_annotator"] = rushed_by;
    Json rl = Json::array();
    for (size_t i = 0; i < rushed_.size() && i < kListed; ++i) rl.push_back(RushedJson(st, rushed_[i]));
    sp["listed"] = std::move(rl);
    j["findings_file"] = "annotator_findings.jsonl";
  }

  Status WriteOutputs(const RunState& st, OutputDir& out) const override {
    std::string body;
    for (const auto& a : annotators_) {
      if (!a.flagged) continue;
      body += Json{{"kind", "candidate_for_review"}, {"annotator", st.Text(a.id)}, {"shared_comparisons", a.shared},
                   {"rate", Round(a.rate)}, {"rate_of_the_rest", Round(a.rest_rate)}, {"p_adjusted", Round(a.p_adjusted, 1e12)}}
                  .dump() + "\n";
    }
    for (const auto& c : cycles_) {
      Json e = CycleJson(st, c);
      e["kind"] = "cycle";
      body += e.dump() + "\n";
    }
    for (const auto& x : rushed_) {
      Json e = RushedJson(st, x);
      e["kind"] = "rushed";
      body += e.dump() + "\n";
    }
    return out.Write("annotator_findings.jsonl", body);
  }

  // Agreement over every parsed record, whatever later stages decided.
  Json AgreementOnly(const RunState& st) {
    std::vector<size_t> recs(st.records.size());
    std::iota(recs.begin(), recs.end(), size_t{0});
    BuildUnits(st, recs);
    Agreement(st);
    Json j{{"comparisons_judged_twice_or_more", overall_.alpha.units}};
    AgreementToJson(overall_, &j);
    return j;
  }

  void SaveRewrites(StateWriter& out, size_t first, size_t count) const override;
  Status LoadRewrites(StateReader& in, size_t count) override;
  bool Rewrites(size_t r) const override { return weighted_.count(r) > 0; }

  Status Rewrite(size_t r, const InputSpec&, Json* doc) const override {
    auto it = weighted_.find(r);
    if (it == weighted_.end()) return Status::Ok();
    try {
      (*doc)[Json::json_pointer(s_.weight_field)] = std::round(it->second * 1e4) / 1e4;
    } catch (const nlohmann::json::exception& e) {
      return Status::Input("annotators: cannot write the weight at " + s_.weight_field + " in record " +
                           std::to_string(r) + ": " + e.what());
    }
    return Status::Ok();
  }

 private:
  struct Judgment {
    size_t record;
    int64_t coder;  // annotator text id, or -(record+1) for a record without an annotator
    uint32_t value;
  };

  static std::string AnnotatorName(const RunState& st, size_t r) {
    const uint32_t id = st.records[r].annotator_id;
    return id ? st.Text(id) : std::string("(none)");
  }

  Json CycleJson(const RunState& st, const Cycle& c) const {
    Json ids = Json::array(), anns = Json::array();
    for (size_t r : c.records) {
      ids.push_back(st.records[r].id);
      anns.push_back(AnnotatorName(st, r));
    }
    return Json{{"prompt_of", st.records[c.first_record].id}, {"candidates_in_cycle", c.candidates},
                {"judgments", std::move(ids)}, {"annotators", std::move(anns)}};
  }

  Json RushedJson(const RunState& st, const Rushed& x) const {
    return Json{{"id", st.records[x.record].id}, {"annotator", AnnotatorName(st, x.record)},
                {"seconds", Round(x.seconds, 1e3)}, {"annotator_median_seconds", Round(x.own_median, 1e3)},
                {"set_median_seconds", Round(x.set_median, 1e3)}};
  }

  static void AgreementToJson(const AgreementFigures& f, Json* out) {
    (*out)["alpha"] = Round(f.alpha.alpha);
    (*out)["interval"] = Json::array({Round(f.interval.lo), Round(f.interval.hi)});
    (*out)["observed_disagreement"] = Round(f.alpha.observed_disagreement);
    (*out)["expected_disagreement"] = Round(f.alpha.expected_disagreement);
    (*out)["pairwise_agreement_rate"] = Round(f.pairwise_agreement);
  }

  // Units: the judgments of one comparison (same comparison key), in input
  // order, one per annotator. Only comparisons judged more than once can make
  // a unit of two or more, so only they are kept (every reader skips smaller
  // units). Keys in parallel, grouped by hash partitions (core/key_groups.h).
  void BuildUnits(const RunState& st, const std::vector<size_t>& recs) {
    ThreadPool pool(s_.threads);  // 0: one per hardware thread
    std::vector<int> value(recs.size());
    pool.ParallelFor(recs.size(), [&](size_t k, unsigned) { value[k] = ChosenIdentity(st.records[recs[k]]); });
    std::vector<size_t> judged;  // records with a single chosen candidate
    judged.reserve(recs.size());
    for (size_t k = 0; k < recs.size(); ++k) {
      if (value[k] < 0) {
        ++tied_top_;
      } else {
        judged.push_back(k);
      }
    }
    std::vector<Hash128> key(judged.size());
    pool.ParallelFor(judged.size(), [&](size_t k, unsigned) {
      Hash128 judgment;
      key[k] = ComparisonKeyOf(st.records[recs[judged[k]]], &judgment);
    });
    const KeyGroups groups = GroupRepeatedKeys(key, pool);
    std::vector<Hash128>().swap(key);
    for (size_t g = 0; g < groups.size(); ++g) {
      auto& u = units_.emplace_back();
      for (uint32_t k : groups[g]) {
        const size_t r = recs[judged[k]];
        const RecordFacts& f = st.records[r];
        const int64_t coder = f.annotator_id ? static_cast<int64_t>(f.annotator_id) : -static_cast<int64_t>(r) - 1;
        bool repeat = false;
        for (const auto& x : u) repeat = repeat || x.coder == coder;
        if (repeat) {
          ++same_annotator_repeats_;
          continue;
        }
        u.push_back(Judgment{r, coder, static_cast<uint32_t>(value[judged[k]])});
      }
    }
  }

  AgreementFigures Figures(const std::vector<stats::Unit>& units, const std::string& stream) const {
    AgreementFigures f;
    f.alpha = stats::KrippendorffAlphaNominal(units);
    f.interval = stats::AlphaBootstrapInterval(units, s_.replicates, bias::SeededHash(seed_, "annotators-bootstrap", stream),
                                               s_.confidence, s_.threads);
    uint64_t agree = 0, pairs = 0;
    for (const auto& u : units) {
      for (size_t a = 0; a < u.size(); ++a) {
        for (size_t b = a + 1; b < u.size(); ++b) {
          ++pairs;
          agree += u[a] == u[b];
        }
      }
    }
    f.pairwise_agreement = pairs ? static_cast<double>(agree) / static_cast<double>(pairs) : kNaN;
    return f;
  }

  void Agreement(const RunState& st) {
    std::vector<stats::Unit> all;
    std::map<std::string, std::vector<stats::Unit>> by_source;
    size_t width = 0;
    bool same_width = true;
    for (const auto& u : units_) {
      if (u.size() < 2) continue;
      stats::Unit vals;
      for (const auto& x : u) vals.push_back(x.value);
      if (width == 0) width = vals.size();
      same_width = same_width && vals.size() == width;
      const std::string& src = st.Text(st.records[u[0].record].source_id);
      by_source[src.empty() ? "(none)" : src].push_back(vals);
      all.push_back(std::move(vals));
    }
    overall_ = Figures(all, "");
    if (by_source.size() > 1) {
      for (const auto& [src, us] : by_source) by_source_[src] = Figures(us, src);
    }
    if (!all.empty() && same_width) {
      uint32_t cats = 0;
      for (const auto& u : all) {
        for (uint32_t v : u) cats = std::max(cats, v + 1);
      }
      std::vector<std::vector<uint64_t>> table(all.size(), std::vector<uint64_t>(cats, 0));
      for (size_t i = 0; i < all.size(); ++i) {
        for (uint32_t v : all[i]) ++table[i][v];
      }
      fleiss_ = stats::FleissKappa(table);
    }
  }

  void TestAnnotators(const RunState& st, const std::vector<size_t>& recs) {
    // Rows by annotator name (deterministic order). Annotator ids are interned
    // texts (RunState::Text), so counting by id counts by name.
    std::vector<uint64_t> judgments_of(st.text_count(), 0);
    for (size_t r : recs) {
      const uint32_t id = st.records[r].annotator_id;
      if (id) ++judgments_of[id];
    }
    std::vector<uint32_t> ids;
    for (uint32_t id = 1; id < judgments_of.size(); ++id) {
      if (judgments_of[id]) ids.push_back(id);
    }
    std::sort(ids.begin(), ids.end(), [&](uint32_t a, uint32_t b) { return st.Text(a) < st.Text(b); });
    std::vector<size_t> index(st.text_count(), 0);  // annotator id -> row
    for (uint32_t id : ids) {
      index[id] = annotators_.size();
      AnnotatorRow& a = annotators_.emplace_back();
      a.id = id;
      a.judgments = judgments_of[id];
    }
    uint64_t total_agree = 0, total_trials = 0;
    std::vector<uint64_t> counts;
    for (const auto& u : units_) {
      if (u.size() < 2) continue;
      counts.assign(64, 0);
      for (const auto& x : u) {
        if (x.value >= counts.size()) counts.resize(x.value + 1, 0);
        ++counts[x.value];
      }
      const uint64_t others = u.size() - 1;
      for (const auto& x : u) {
        if (x.coder <= 0) continue;
        // The majority of the others: a value held by more than half of them.
        --counts[x.value];
        int64_t maj = -1;
        for (size_t c = 0; c < counts.size(); ++c) {
          if (2 * counts[c] > others) maj = static_cast<int64_t>(c);
        }
        ++counts[x.value];
        if (maj < 0) continue;
        AnnotatorRow& a = annotators_[index[static_cast<uint32_t>(x.coder)]];
        ++a.shared;
        ++total_trials;
        if (static_cast<int64_t>(x.value) == maj) {
          ++a.agree;
          ++total_agree;
        }
      }
    }
    std::vector<double> p;
    std::vector<size_t> tested;
    for (size_t i = 0; i < annotators_.size(); ++i) {
      AnnotatorRow& a = annotators_[i];
      if (a.shared) a.rate = static_cast<double>(a.agree) / static_cast<double>(a.shared);
      if (a.shared < s_.min_shared || total_trials <= a.shared) continue;
      a.rest_rate = static_cast<double>(total_agree - a.agree) / static_cast<double>(total_trials - a.shared);
      a.p = stats::BinomTestTwoSided(a.agree, a.shared, a.rest_rate);
      a.tested = true;
      p.push_back(a.p);
      tested.push_back(i);
    }
    tested_ = tested.size();
    std::vector<double> adj = bias::AdjustFamily(p, s_.correction);
    for (size_t k = 0; k < tested.size(); ++k) {
      AnnotatorRow& a = annotators_[tested[k]];
      a.p_adjusted = adj[k];
      a.flagged = a.p_adjusted <= s_.alpha && a.rate <= a.rest_rate - s_.min_shortfall;
      if (a.flagged) {
        a.weight = a.rest_rate > 0 ? std::clamp(a.rate / a.rest_rate, 0.0, 1.0) : 0.0;
        flagged_judgments_ += a.judgments;
      }
    }
    flagged_ids_.clear();
    for (const auto& a : annotators_) {
      if (a.flagged) flagged_ids_[a.id] = a.weight;
    }
  }

  // Prompts judged more than once (grouped by prompt hash in parallel), each
  // searched for cycles on its own; found cycles are kept in prompt-hash order
  // before the final sort, as a serial scan in that order would find them.
  void FindCycles(const RunState& st, const std::vector<size_t>& recs) {
    ThreadPool pool(s_.threads);  // 0: one per hardware thread
    std::vector<Hash128> prompt(recs.size());
    pool.ParallelFor(recs.size(), [&](size_t k, unsigned) { prompt[k] = st.records[recs[k]].prompt_hash; });
    const KeyGroups groups = GroupRepeatedKeys(prompt, pool);
    prompts_judged_ += groups.size();
    std::vector<uint32_t> by_hash(groups.size());
    std::iota(by_hash.begin(), by_hash.end(), 0u);
    std::sort(by_hash.begin(), by_hash.end(), [&](uint32_t a, uint32_t b) {
      return prompt[groups[a][0]] < prompt[groups[b][0]];
    });
    std::vector<std::vector<Cycle>> found(groups.size());
    pool.ParallelFor(groups.size(), [&](size_t i, unsigned) {
      std::vector<size_t> group;
      for (uint32_t k : groups[by_hash[i]]) group.push_back(recs[k]);  // increasing record order
      CyclesOfPrompt(st, group, &found[i]);
    });
    for (auto& list : found) {
      for (Cycle& c : list) {
        cycle_records_ += c.records.size();
        cycles_.push_back(std::move(c));
      }
    }
    std::sort(cycles_.begin(), cycles_.end(), [](const Cycle& a, const Cycle& b) { return a.first_record < b.first_record; });
  }

  // Thread-safe: reads `st`, writes only *out.
  static void CyclesOfPrompt(const RunState& st, const std::vector<size_t>& group, std::vector<Cycle>* out) {
    std::vector<Hash128> nodes;
    for (size_t r : group) {
      for (const CandidateFacts& c : st.records[r].cands) nodes.push_back(c.hash);
    }
    std::sort(nodes.begin(), nodes.end());
    nodes.erase(std::unique(nodes.begin(), nodes.end()), nodes.end());
    auto node = [&](const Hash128& h) {
      return static_cast<uint32_t>(std::lower_bound(nodes.begin(), nodes.end(), h) - nodes.begin());
    };
    // Ordered pair (winner, loser) -> records that imply it.
    std::map<std::pair<uint32_t, uint32_t>, std::vector<size_t>> wins;
    for (size_t r : group) {
      const RecordFacts& f = st.records[r];
      for (size_t a = 0; a < f.cands.size(); ++a) {
        for (size_t b = 0; b < f.cands.size(); ++b) {
          if (f.cands[a].rank >= f.cands[b].rank || f.cands[a].hash == f.cands[b].hash) continue;
          auto& v = wins[{node(f.cands[a].hash), node(f.cands[b].hash)}];
          if (v.empty() || v.back() != r) v.push_back(r);
        }
      }
    }
    // Majority direction of each pair; ties give no edge.
    std::vector<std::pair<uint32_t, uint32_t>> edges;
    for (const auto& [pair, rs] : wins) {
      auto back = wins.find({pair.second, pair.first});
      const size_t against = back == wins.end() ? 0 : back->second.size();
      if (rs.size() > against) edges.push_back(pair);
    }
    if (edges.size() < 3) return;
    auto comp = stats::StronglyConnectedComponents(static_cast<uint32_t>(nodes.size()), edges);
    std::map<uint32_t, uint32_t> size;
    for (uint32_t c : comp) ++size[c];
    std::map<uint32_t, Cycle> found;
    for (const auto& e : edges) {
      const uint32_t c = comp[e.first];
      if (c != comp[e.second] || size[c] < 3) continue;
      Cycle& cy = found[c];
      cy.candidates = size[c];
      for (size_t r : wins[e]) cy.records.push_back(r);
    }
    for (auto& [c, cy] : found) {
      std::sort(cy.records.begin(), cy.records.end());
      cy.records.erase(std::unique(cy.records.begin(), cy.records.end()), cy.records.end());
      cy.first_record = group.front();
      out->push_back(std::move(cy));
    }
  }

  void FindRushed(const RunState& st, const std::vector<size_t>& recs) {
    std::map<uint32_t, std::vector<std::pair<double, size_t>>> by_ann;
    for (size_t r : recs) {
      const double t = r < times_.size() ? times_[r] : kNaN;
      if (std::isnan(t)) continue;
      if (std::isinf(t)) {
        ++bad_times_;
        continue;
      }
      ++timed_;
      if (st.records[r].annotator_id) by_ann[st.records[r].annotator_id].push_back({t, r});
    }
    std::vector<std::pair<uint32_t, std::vector<std::pair<double, size_t>>>> gaps;  // annotator -> (gap, record)
    std::vector<double> all;
    for (auto& [ann, v] : by_ann) {
      std::sort(v.begin(), v.end());
      std::vector<std::pair<double, size_t>> g;
      for (size_t k = 1; k < v.size(); ++k) {
        const double d = v[k].first - v[k - 1].first;
        if (d < 0 || d > s_.session_gap) continue;
        g.push_back({d, v[k].second});
        all.push_back(d);
      }
      gaps.emplace_back(ann, std::move(g));
    }
    gaps_ = all.size();
    set_median_ = Median(all);
    for (const auto& [ann, g] : gaps) {
      std::vector<double> d;
      for (const auto& x : g) d.push_back(x.first);
      const double own = d.size() >= s_.min_gaps ? Median(d) : kNaN;
      for (const auto& x : g) {
        const bool fast_own = !std::isnan(own) && x.first < s_.rushed_fraction * own;
        const bool fast_set = !std::isnan(set_median_) && x.first < s_.rushed_fraction * set_median_;
        if (fast_own || fast_set) rushed_.push_back(Rushed{x.second, x.first, own, set_median_});
      }
    }
    std::sort(rushed_.begin(), rushed_.end(), [](const Rushed& a, const Rushed& b) { return a.record < b.record; });
  }

  void ApplyPolicies(RunState& st) {
    if (s_.reject_cycles) {
      for (const auto& c : cycles_) {
        for (size_t r : c.records) {
          if (st.Reject(r, name(), "intransitive_judgment",
                        "this judgment supports a preference cycle among the candidates of its prompt "
                        "(with other judgments of the same prompt)",
                        Json{{"prompt_of", st.records[c.first_record].id}, {"candidates_in_cycle", c.candidates}}.dump())) {
            ++cycles_rejected_;
          }
        }
      }
    }
    if (flagged_ids_.empty() || s_.flagged == FlaggedPolicy::kReport) return;
    for (size_t r = 0; r < st.records.size(); ++r) {
      auto it = flagged_ids_.find(st.records[r].annotator_id);
      if (it == flagged_ids_.end() || !st.IsKept(r)) continue;
      if (s_.flagged == FlaggedPolicy::kDrop) {
        if (st.Reject(r, name(), "flagged_annotator",
                      "the annotator's agreement with the other annotators is significantly below the rest of the set "
                      "(a candidate for review); policy drop",
                      Json{{"annotator", st.Text(it->first)}}.dump())) {
          ++dropped_;
        }
      } else {
        weighted_[r] = it->second;
      }
    }
  }

  Settings s_;
  uint64_t seed_;
  bool timed_layout_;
  std::vector<double> times_;  // seconds; NaN = no timestamp, -inf = unreadable
  std::vector<std::vector<Judgment>> units_;
  AgreementFigures overall_;
  std::map<std::string, AgreementFigures> by_source_;
  double fleiss_ = kNaN;
  std::vector<AnnotatorRow> annotators_;
  std::unordered_map<uint32_t, double> flagged_ids_;  // annotator id -> weight
  std::unordered_map<size_t, double> weighted_;       // record -> weight written
  std::vector<Cycle> cycles_;
  std::vector<Rushed> rushed_;
  uint64_t records_ = 0, tied_top_ = 0, same_annotator_repeats_ = 0, tested_ = 0, flagged_judgments_ = 0, dropped_ = 0,
           prompts_judged_ = 0, cycle_records_ = 0, cycles_rejected_ = 0, timed_ = 0, bad_times_ = 0, gaps_ = 0;
  double set_median_ = kNaN;
};

// Settings parsing: every error names the key.
bool Fail(Status* error, const std::string& key, const std::string& what) {
  *error = Status::Usage("stages.annotators." + key + ": " + what);
  return false;
}

bool Number(Status* error, const Json& v, const std::string& key, double lo, double hi, double* out) {
  if (!v.is_number() || !std::isfinite(v.get<double>()) || v.get<double>() <= lo || v.get<double>() >= hi) {
    return Fail(error, key, "must be a number in (" + Json(lo).dump() + ", " + Json(hi).dump() + ")");
  }
  *out = v.get<double>();
  return true;
}

bool Count(Status* error, const Json& v, const std::string& key, uint64_t lo, uint64_t hi, uint64_t* out) {
  if (!v.is_number_integer() || v.get<long long>() < static_cast<long long>(lo) ||
      v.get<long long>() > static_cast<long long>(hi)) {
    return Fail(error, key, "must be an integer in [" + std::to_string(lo) + ", " + std::to_string(hi) + "]");
  }
  *out = v.get<uint64_t>();
  return true;
}

}  // namespace

std::unique_ptr<Stage> MakeAnnotatorsStage(const Plan& plan, FileSystem* /*fs*/, Status* error) {
  const Json& s = StageSettings(plan, "annotators");
  Settings b;
  b.threads = plan.threads;
  for (auto it = s.begin(); it != s.end(); ++it) {
    const std::string& k = it.key();
    const Json& v = it.value();
    uint64_t n = 0;
    if (k == "enabled") continue;
    if (k == "bootstrap_replicates") {
      if (!Count(error, v, k, 0, 100000, &n)) return nullptr;
      b.replicates = static_cast<uint32_t>(n);
    } else if (k == "confidence") {
      if (!Number(error, v, k, 0, 1, &b.confidence)) return nullptr;
    } else if (k == "min_shared") {
      if (!Count(error, v, k, 1, UINT32_MAX, &b.min_shared)) return nullptr;
    } else if (k == "correction") {
      std::string c = v.is_string() ? v.get<std::string>() : "";
      if (c == "holm") b.correction = bias::Correction::kHolm;
      else if (c == "benjamini-hochberg") b.correction = bias::Correction::kBenjaminiHochberg;
      else return Fail(error, k, "must be \"holm\" or \"benjamini-hochberg\""), nullptr;
    } else if (k == "alpha") {
      if (!Number(error, v, k, 0, 1, &b.alpha)) return nullptr;
    } else if (k == "min_shortfall") {
      if (!v.is_number() || !(v.get<double>() >= 0 && v.get<double>() < 1)) {
        return Fail(error, k, "must be a number in [0, 1)"), nullptr;
      }
      b.min_shortfall = v.get<double>();
    } else if (k == "flagged") {
      std::string c = v.is_string() ? v.get<std::string>() : "";
      if (c == "report") b.flagged = FlaggedPolicy::kReport;
      else if (c == "drop") b.flagged = FlaggedPolicy::kDrop;
      else if (c == "weight") b.flagged = FlaggedPolicy::kWeight;
      else return Fail(error, k, "must be \"report\", \"drop\" or \"weight\""), nullptr;
    } else if (k == "weight_field") {
      if (!v.is_string()) return Fail(error, k, "must be a JSON Pointer string"), nullptr;
      auto p = ParseJsonPointer(v.get<std::string>(), "stages.annotators.weight_field");
      if (!p.ok()) return *error = p.status(), nullptr;
      if (p.value().empty()) return Fail(error, k, "must name a field, not the whole record"), nullptr;
      b.weight_field = v.get<std::string>();
    } else if (k == "cycles") {
      std::string c = v.is_string() ? v.get<std::string>() : "";
      if (c == "report") b.reject_cycles = false;
      else if (c == "reject") b.reject_cycles = true;
      else return Fail(error, k, "must be \"report\" or \"reject\""), nullptr;
    } else if (k == "rushed_fraction") {
      if (!Number(error, v, k, 0, 1, &b.rushed_fraction)) return nullptr;
    } else if (k == "session_gap_seconds") {
      if (!Number(error, v, k, 0, 1e9, &b.session_gap)) return nullptr;
    } else if (k == "min_gaps") {
      if (!Count(error, v, k, 1, UINT32_MAX, &b.min_gaps)) return nullptr;
    } else {
      *error = Status::Usage("stages.annotators: unknown setting \"" + k +
                             "\" (known: bootstrap_replicates, confidence, min_shared, correction, alpha, min_shortfall, flagged, "
                             "weight_field, cycles, rushed_fraction, session_gap_seconds, min_gaps)");
      return nullptr;
    }
  }
  if (b.flagged == FlaggedPolicy::kWeight && b.weight_field.empty()) {
    *error = Status::Usage("stages.annotators.weight_field: required when \"flagged\" is \"weight\" (a JSON Pointer, e.g. \"/weight\")");
    return nullptr;
  }
  bool timed = false;
  for (const auto& in : plan.inputs) timed = timed || in.layout.has_timestamp;
  return std::make_unique<AnnotatorsStage>(std::move(b), plan.seed, timed);
}

Json BatchAgreement(const Plan& plan, const RunState& st) {
  const Json& s = StageSettings(plan, "annotators");
  if (s.contains("enabled") && s["enabled"].is_boolean() && !s["enabled"].get<bool>()) return nullptr;
  Status err;
  auto stage = MakeAnnotatorsStage(plan, /*fs=*/nullptr, &err);  // reads no file
  if (!stage) return nullptr;
  return static_cast<AnnotatorsStage*>(stage.get())->AgreementOnly(st);
}

}  // namespace prefsift

// Observed state (state files, docs/parts.md): each judgment's time,
// when some layout has a timestamp.
namespace prefsift {
namespace {

void AnnotatorsStage::SaveObserved(StateWriter& out) const {
  out.U8(timed_layout_);
  out.Vec(times_);
}

Status AnnotatorsStage::AppendObserved(StateReader& in, size_t first) {
  if (in.U8() != uint8_t{timed_layout_}) in.Fail("made with inputs of other layouts");
  if (timed_layout_) {
    times_.resize(first, kNaN);
    in.AppendVec(&times_);
  } else {
    std::vector<double> none;
    in.Vec(&none);
  }
  return Status::Ok();
}

}  // namespace
}  // namespace prefsift

// Decided rewrites (decision files, docs/parts.md): the weight written into
// each record of a flagged annotator (policy "weight").
namespace prefsift {
namespace {

void AnnotatorsStage::SaveRewrites(StateWriter& out, size_t first, size_t count) const {
  std::vector<std::pair<size_t, double>> mine;
  for (const auto& [r, w] : weighted_) {
    if (r >= first && r < first + count) mine.push_back({r - first, w});
  }
  std::sort(mine.begin(), mine.end());
  out.U64(mine.size());
  for (const auto& [r, w] : mine) {
    out.U64(r);
    out.F64(w);
  }
}

Status AnnotatorsStage::LoadRewrites(StateReader& in, size_t count) {
  weighted_.clear();
  const uint64_t n = in.Count(16);
  for (uint64_t k = 0; k < n && in.ok(); ++k) {
    const uint64_t r = in.U64();
    const double w = in.F64();
    if (r >= count) in.Fail("a record out of range");
    weighted_[r] = w;
  }
  return Status::Ok();
}

}  // namespace
}  // namespace prefsift
