#include "stages/bias/bias_stage.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cmath>

#include "core/state_file.h"
#include "core/thread_pool.h"
#include "stages/bias/bias_common.h"
#include "stages/bias/bias_length.h"
#include "stages/bias/bias_position.h"
#include "stages/bias/shortcut_audit.h"
#include "stats/surface_features.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;
using namespace bias;  // NOLINT: this file is the stage of that namespace

struct BiasSettings {
  Correction correction = Correction::kHolm;
  double alpha = 0.05;
  uint64_t min_group_records = 10;
  bool rebalance_position = false;
  bool rebalance_length = false;
  LengthRebalanceOptions length;
  AuditOptions audit;
};

class BiasStage : public Stage {
 public:
  BiasStage(BiasSettings s, uint64_t seed) : s_(std::move(s)), seed_(seed) {}
  std::string name() const override { return "bias"; }

  void Reserve(size_t n) override { surface_.reserve(n); }
  void Grow(size_t n) override { surface_.resize(n); }

  void Observe(size_t r, const Record& rec, const RecordFacts&, const MatchText&) override {
    auto& out = surface_[r];
    out.resize(rec.candidates.size());
    for (size_t i = 0; i < rec.candidates.size(); ++i) {
      stats::SurfaceFeatures f = stats::ComputeSurfaceFeatures(rec.candidates[i]);
      CandidateSurface& c = out[i];
      c.words = static_cast<uint32_t>(std::min<uint64_t>(f.words, UINT32_MAX));
      c.list_items = static_cast<uint16_t>(std::min<uint64_t>(f.list_items, UINT16_MAX));
      c.flags = static_cast<uint8_t>((f.has_code_block ? CandidateSurface::kCodeBlock : 0) |
                                     (f.has_heading ? CandidateSurface::kHeading : 0) |
                                     (f.has_refusal ? CandidateSurface::kRefusal : 0) |
                                     (f.has_url ? CandidateSurface::kUrl : 0));
    }
  }

  void SaveObserved(StateWriter& out) const override;
  Status AppendObserved(StateReader& in, size_t first_record) override;

  Status Decide(StageContext& ctx) override {
    RunState& st = ctx.run;
    std::vector<size_t> kept;
    for (size_t r = 0; r < st.records.size(); ++r) {
      if (st.IsKept(r)) kept.push_back(r);
    }
    records_in_ = kept.size();
    PositionOptions po{s_.correction, s_.alpha, s_.min_group_records};
    LengthOptions lo{s_.correction, s_.alpha, s_.min_group_records};
    ThreadPool pool(ctx.plan.threads);  // 0: one per hardware thread
    // The three measures only read the facts: side by side, the audit (the
    // longest; its fits use threads of their own) first.
    pool.ParallelFor(3, [&](size_t t, unsigned) {
      if (t == 0) audit_before_ = RunShortcutAudit(st, kept, surface_, nullptr, seed_, s_.audit);
      if (t == 1) length_before_ = ComputeLengthStats(st, kept, seed_, lo);
      if (t == 2) position_before_ = ComputePositionStats(st, kept, nullptr, po);
    });

    // 1. Length rebalancing: rejects.
    if (s_.rebalance_length) {
      length_plan_ = PlanLengthRebalance(st, kept, seed_, s_.length);
      for (const auto& d : length_plan_.discard) {
        const double lo_edge = d.bin == 0 ? 0.0 : s_.length.bin_edges[d.bin - 1];
        Json range = Json::array({lo_edge, d.bin < s_.length.bin_edges.size() ? Json(s_.length.bin_edges[d.bin])
                                                                             : Json(nullptr)});
        Json detail{{"unit", LengthUnitName(s_.length.unit)},
                    {"chosen", d.direction > 0 ? "longer" : "shorter"},
                    {"ratio", d.ratio >= 0 ? Json(std::round(d.ratio * 1e4) / 1e4) : Json(nullptr)},
                    {"abs_log2_ratio_bin", range},
                    {"target_share", s_.length.target},
                    {"source", st.Text(st.records[d.record].source_id)}};
        if (st.Reject(d.record, name(), "length_rebalance",
                      std::string("discarded to bring the chosen-longer share to the target: the chosen answer is ") +
                          (d.direction > 0 ? "longer" : "shorter") + " and its source's length-ratio bin had too many such records",
                      detail.dump())) {
          ++discarded_;
        }
      }
      kept.erase(std::remove_if(kept.begin(), kept.end(), [&](size_t r) { return !st.IsKept(r); }), kept.end());
    }
    // 2. Position rebalancing: a permutation per record.
    if (s_.rebalance_position) {
      new_slot_ = AssignBalancedSlots(st, kept, seed_);
      for (size_t r : kept) {
        const auto& p = new_slot_[r];
        if (p.empty()) continue;
        ++permuted_;
        bool identity = true;
        for (size_t i = 0; i < p.size(); ++i) identity = identity && p[i] == i;
        if (identity) {
          new_slot_[r].clear();
        } else {
          ++reordered_;
        }
      }
    }
    any_rebalance_ = s_.rebalance_position || (s_.rebalance_length && length_plan_.applied);
    if (any_rebalance_) {
      pool.ParallelFor(3, [&](size_t t, unsigned) {
        if (t == 0) audit_after_ = RunShortcutAudit(st, kept, surface_, &new_slot_, seed_, s_.audit);
        if (t == 1) length_after_ = ComputeLengthStats(st, kept, seed_, lo);
        if (t == 2) position_after_ = ComputePositionStats(st, kept, &new_slot_, po);
      });
    }
    records_out_ = kept.size();
    std::vector<CandidateSurfaces>().swap(surface_);  // only the audits above read it (= {} would keep the memory)
    return Status::Ok();
  }

  void Figures(const RunState&, GateFigures* g) const override {
    g->position_ran = true;
    double minp = std::numeric_limits<double>::infinity();
    g->position_scope = "chosen-slot tests by number of candidates";
    if (s_.rebalance_position && !position_after_.overall.empty()) {
      g->position_scope = "after position rebalancing (unadjusted p)";
      for (const auto& t : position_after_.overall) {
        if (t.p == t.p) minp = std::min(minp, t.p);
      }
    } else {
      for (const auto& t : position_before_.overall) {
        if (t.tested && t.p_adjusted == t.p_adjusted) minp = std::min(minp, t.p_adjusted);
      }
    }
    if (!std::isinf(minp)) g->min_position_p = minp;
    const AuditResult& a = any_rebalance_ ? audit_after_ : audit_before_;
    if (a.ran) {
      g->shortcut_accuracy = a.heldout_accuracy;
      g->shortcut_lift = a.lift;
      g->shortcut_flagged = a.flagged;
    }
  }

  void Report(const RunState&, Json* out) const override {
    Json& j = *out;
    j["correction"] = CorrectionName(s_.correction);
    j["alpha"] = s_.alpha;
    j["min_group_records"] = s_.min_group_records;
    j["records_in"] = records_in_;
    j["records_out"] = records_out_;
    PositionOptions po{s_.correction, s_.alpha, s_.min_group_records};

    Json pos;
    PositionStatsToJson(position_before_, po, &pos);
    pos["note"] = "pairwise layouts (chosen/rejected fields) have no slot and are not in the position statistics";
    Json pr;
    pr["enabled"] = s_.rebalance_position;
    if (s_.rebalance_position) {
      pr["records_assigned"] = permuted_;
      pr["records_reordered"] = reordered_;
      Json after = Json::array();
      for (const auto& t : position_after_.overall) {
        after.push_back(Json{{"candidates", t.b}, {"records", t.n}, {"chosen_slot_counts", t.counts}, {"p", t.p}});
      }
      pr["after"] = std::move(after);
    }
    pos["rebalance"] = std::move(pr);
    j["position"] = std::move(pos);

    Json len;
    LengthStatsToJson(length_before_, &len);
    Json lr;
    lr["enabled"] = s_.rebalance_length;
    if (s_.rebalance_length) {
      lr["applied"] = length_plan_.applied;
      lr["unit"] = LengthUnitName(s_.length.unit);
      lr["target"] = s_.length.target;
      lr["tolerance"] = s_.length.tolerance;
      lr["discarded"] = discarded_;
      lr["chosen_longer_share_before"] = length_plan_.share_before;
      lr["chosen_longer_share_after"] = length_plan_.share_after;
      Json bins = Json::array();
      for (size_t k = 0; k < length_plan_.bins.size(); ++k) {
        const auto& b = length_plan_.bins[k];
        bins.push_back(Json{{"abs_log2_ratio_from", k == 0 ? 0.0 : s_.length.bin_edges[k - 1]},
                            {"abs_log2_ratio_to", k < s_.length.bin_edges.size() ? Json(s_.length.bin_edges[k])
                                                                                 : Json(nullptr)},
                            {"chosen_longer", b.longer},
                            {"chosen_shorter", b.shorter},
                            {"chosen_longer_kept", b.longer_kept},
                            {"chosen_shorter_kept", b.shorter_kept}});
      }
      lr["bins"] = std::move(bins);
      lr["by_source"] = s_.length.by_source;
      Json strata = Json::array();
      for (const auto& sr : length_plan_.strata) {
        strata.push_back(Json{{"source", sr.source},
                              {"chosen_longer", sr.longer},
                              {"chosen_shorter", sr.shorter},
                              {"rebalanced", sr.rebalanced},
                              {"chosen_longer_kept", sr.longer_kept},
                              {"chosen_shorter_kept", sr.shorter_kept}});
      }
      lr["strata"] = std::move(strata);
    }
    if (any_rebalance_) {
      Json after;
      LengthStatsToJson(length_after_, &after);
      after.erase("histograms");
      lr["after"] = std::move(after);
    }
    len["rebalance"] = std::move(lr);
    j["length"] = std::move(len);

    // The audit of the output (after any rebalancing): what a reward model
    // trained on the kept records could learn from surface features.
    Json audit;
    AuditToJson(any_rebalance_ ? audit_after_ : audit_before_, s_.audit, &audit);
    audit["scope"] = any_rebalance_ ? "kept records after rebalancing" : "kept records";
    if (any_rebalance_) {
      Json before;
      AuditToJson(audit_before_, s_.audit, &before);
      audit["before_rebalancing"] = std::move(before);
    }
    j["shortcut_audit"] = std::move(audit);
  }

  void SaveRewrites(StateWriter& out, size_t first, size_t count) const override;
  Status LoadRewrites(StateReader& in, size_t count) override;
  bool Rewrites(size_t r) const override { return r < new_slot_.size() && !new_slot_[r].empty(); }

  Status Rewrite(size_t r, const InputSpec& input, Json* doc) const override {
    const std::vector<uint32_t>& slot = new_slot_[r];
    const Layout& L = input.layout;
    const size_t b = slot.size();
    try {
      Json& cands = doc->at(Json::json_pointer(L.candidates.text));
      if (!cands.is_array() || cands.size() != b) {
        return Status::Internal("bias: record " + std::to_string(r) + ": candidates changed shape before rewriting");
      }
      Json moved = Json::array();
      for (size_t i = 0; i < b; ++i) moved.push_back(nullptr);
      for (size_t i = 0; i < b; ++i) moved[slot[i]] = std::move(cands[i]);
      cands = std::move(moved);
      if (L.judgment == JudgmentShape::kChoice) {
        Json& ch = doc->at(Json::json_pointer(L.choice.text));
        const long long old = ch.get<long long>() - L.choice_base;
        ch = static_cast<long long>(slot[static_cast<size_t>(old)]) + L.choice_base;
      } else if (L.judgment == JudgmentShape::kRanks) {
        Json& rk = doc->at(Json::json_pointer(L.ranking.text));
        Json next = Json::array();
        for (size_t i = 0; i < b; ++i) next.push_back(nullptr);
        for (size_t i = 0; i < b; ++i) next[slot[i]] = std::move(rk[i]);
        rk = std::move(next);
      } else if (L.judgment == JudgmentShape::kOrder) {
        Json& od = doc->at(Json::json_pointer(L.ranking.text));
        for (size_t k = 0; k < b; ++k) od[k] = static_cast<long long>(slot[od[k].get<size_t>()]);
      }
    } catch (const nlohmann::json::exception& e) {
      return Status::Internal(std::string("bias: cannot reorder record ") + std::to_string(r) + ": " + e.what());
    }
    return Status::Ok();
  }

 private:
  BiasSettings s_;
  uint64_t seed_;
  std::vector<CandidateSurfaces> surface_;
  std::vector<std::vector<uint32_t>> new_slot_;
  uint64_t records_in_ = 0, records_out_ = 0, discarded_ = 0, permuted_ = 0, reordered_ = 0;
  bool any_rebalance_ = false;
  PositionStats position_before_, position_after_;
  LengthStats length_before_, length_after_;
  LengthRebalancePlan length_plan_;
  AuditResult audit_before_, audit_after_;
};

// Settings parsing: every error names the key.
class Reader {
 public:
  explicit Reader(Status* error) : error_(error) {}
  bool Fail(const std::string& key, const std::string& what) {
    *error_ = Status::Usage("stages.bias." + key + ": " + what);
    return false;
  }
  bool Bool(const Json& v, const std::string& key, bool* out) {
    if (!v.is_boolean()) return Fail(key, "must be true or false");
    *out = v.get<bool>();
    return true;
  }
  bool Number(const Json& v, const std::string& key, double lo, double hi, bool open_lo, bool open_hi, double* out) {
    if (!v.is_number()) return Fail(key, "must be a number");
    double x = v.get<double>();
    bool ok = std::isfinite(x) && (open_lo ? x > lo : x >= lo) && (open_hi ? x < hi : x <= hi);
    if (!ok) {
      return Fail(key, std::string("must be in ") + (open_lo ? "(" : "[") + Json(lo).dump() + ", " + Json(hi).dump() +
                           (open_hi ? ")" : "]"));
    }
    *out = x;
    return true;
  }
  bool Count(const Json& v, const std::string& key, uint64_t lo, uint64_t* out) {
    if (!v.is_number_integer() || (v.is_number_integer() && v.get<long long>() < static_cast<long long>(lo))) {
      return Fail(key, "must be an integer >= " + std::to_string(lo));
    }
    *out = v.get<uint64_t>();
    return true;
  }
  bool Object(const Json& v, const std::string& key) {
    if (!v.is_object()) return Fail(key, "must be an object");
    return true;
  }
  bool Unknown(const std::string& key, const char* known) { return Fail(key, std::string("unknown setting (known: ") + known + ")"); }

 private:
  Status* error_;
};

}  // namespace

std::unique_ptr<Stage> MakeBiasStage(const Plan& plan, FileSystem* /*fs*/, Status* error) {
  const Json& s = StageSettings(plan, "bias");
  BiasSettings b;
  b.audit.threads = plan.threads;  // the run's --threads (0: one per core)
  Reader rd(error);
  for (auto it = s.begin(); it != s.end(); ++it) {
    const std::string& k = it.key();
    const Json& v = it.value();
    if (k == "enabled") continue;
    if (k == "correction") {
      std::string c = v.is_string() ? v.get<std::string>() : "";
      if (c == "holm") b.correction = Correction::kHolm;
      else if (c == "benjamini-hochberg") b.correction = Correction::kBenjaminiHochberg;
      else return rd.Fail(k, "must be \"holm\" or \"benjamini-hochberg\""), nullptr;
    } else if (k == "alpha") {
      if (!rd.Number(v, k, 0, 1, true, true, &b.alpha)) return nullptr;
    } else if (k == "min_group_records") {
      if (!rd.Count(v, k, 1, &b.min_group_records)) return nullptr;
    } else if (k == "position") {
      if (!rd.Object(v, k)) return nullptr;
      for (auto p = v.begin(); p != v.end(); ++p) {
        const std::string key = "position." + p.key();
        if (p.key() == "rebalance") {
          if (!rd.Bool(p.value(), key, &b.rebalance_position)) return nullptr;
        } else {
          return rd.Unknown(key, "rebalance"), nullptr;
        }
      }
    } else if (k == "length") {
      if (!rd.Object(v, k)) return nullptr;
      for (auto p = v.begin(); p != v.end(); ++p) {
        const std::string key = "length." + p.key();
        const Json& pv = p.value();
        if (p.key() == "rebalance") {
          if (!rd.Bool(pv, key, &b.rebalance_length)) return nullptr;
        } else if (p.key() == "target") {
          if (!rd.Number(pv, key, 0, 1, true, true, &b.length.target)) return nullptr;
        } else if (p.key() == "tolerance") {
          if (!rd.Number(pv, key, 0, 0.5, false, false, &b.length.tolerance)) return nullptr;
        } else if (p.key() == "unit") {
          std::string u = pv.is_string() ? pv.get<std::string>() : "";
          if (u == "words") b.length.unit = LengthUnit::kWords;
          else if (u == "characters") b.length.unit = LengthUnit::kChars;
          else return rd.Fail(key, "must be \"words\" or \"characters\""), nullptr;
        } else if (p.key() == "bins") {
          if (!pv.is_array()) return rd.Fail(key, "must be an array of ascending positive numbers"), nullptr;
          std::vector<double> edges;
          for (const auto& e : pv) {
            if (!e.is_number() || !std::isfinite(e.get<double>()) || e.get<double>() <= 0 ||
                (!edges.empty() && e.get<double>() <= edges.back())) {
              return rd.Fail(key, "must be an array of ascending positive numbers"), nullptr;
            }
            edges.push_back(e.get<double>());
          }
          b.length.bin_edges = std::move(edges);
        } else if (p.key() == "by_source") {
          if (!rd.Bool(pv, key, &b.length.by_source)) return nullptr;
        } else {
          return rd.Unknown(key, "rebalance, target, tolerance, unit, bins, by_source"), nullptr;
        }
      }
    } else if (k == "shortcut_audit") {
      if (!rd.Object(v, k)) return nullptr;
      for (auto p = v.begin(); p != v.end(); ++p) {
        const std::string key = "shortcut_audit." + p.key();
        const Json& pv = p.value();
        if (p.key() == "folds") {
          uint64_t f = 0;
          if (!rd.Count(pv, key, 2, &f)) return nullptr;
          if (f > 100) return rd.Fail(key, "must be at most 100"), nullptr;
          b.audit.folds = static_cast<int>(f);
        } else if (p.key() == "alpha") {
          if (!rd.Number(pv, key, 0, 1, true, false, &b.audit.alpha)) return nullptr;
        } else if (p.key() == "min_lift") {
          if (!rd.Number(pv, key, 0, 1, false, false, &b.audit.min_lift)) return nullptr;
        } else if (p.key() == "l2") {
          if (!rd.Number(pv, key, 0, 1e12, false, false, &b.audit.l2)) return nullptr;
        } else if (p.key() == "min_records") {
          if (!rd.Count(pv, key, 2, &b.audit.min_records)) return nullptr;
        } else {
          return rd.Unknown(key, "folds, alpha, min_lift, l2, min_records"), nullptr;
        }
      }
    } else {
      return rd.Unknown(k, "correction, alpha, min_group_records, position, length, shortcut_audit"), nullptr;
    }
  }
  return std::make_unique<BiasStage>(std::move(b), plan.seed);
}

}  // namespace prefsift

// Observed state (state files, docs/parts.md): each candidate's surface features.
namespace prefsift {
namespace {

void BiasStage::SaveObserved(StateWriter& out) const {
  out.U64(surface_.size());
  for (const auto& cands : surface_) {
    out.U64(cands.size());
    for (const CandidateSurface& c : cands) {
      out.U32(c.words);
      out.U32(c.list_items);
      out.U8(c.flags);
    }
  }
}

Status BiasStage::AppendObserved(StateReader& in, size_t first) {
  const uint64_t n = in.Count(8);
  surface_.resize(first + n);
  for (size_t r = first; r < first + n && in.ok(); ++r) {
    surface_[r].resize(in.Count(9));
    for (CandidateSurface& c : surface_[r]) {
      c.words = in.U32();
      c.list_items = static_cast<uint16_t>(in.U32());
      c.flags = in.U8();
    }
  }
  return Status::Ok();
}

}  // namespace
}  // namespace prefsift

// Decided rewrites (decision files, docs/parts.md): each reordered record's new slots.
namespace prefsift {
namespace {

void BiasStage::SaveRewrites(StateWriter& out, size_t first, size_t count) const {
  std::vector<size_t> moved;
  for (size_t r = first; r < first + count && r < new_slot_.size(); ++r) {
    if (!new_slot_[r].empty()) moved.push_back(r);
  }
  out.U64(moved.size());
  for (size_t r : moved) {
    out.U64(r - first);
    out.Vec(new_slot_[r]);
  }
}

Status BiasStage::LoadRewrites(StateReader& in, size_t count) {
  new_slot_.assign(count, {});
  const uint64_t n = in.Count(16);
  for (uint64_t k = 0; k < n && in.ok(); ++k) {
    const uint64_t r = in.U64();
    if (r >= count) {
      in.Fail("a record out of range");
      break;
    }
    in.Vec(&new_slot_[r]);
  }
  return Status::Ok();
}

}  // namespace
}  // namespace prefsift
