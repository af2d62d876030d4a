// The datasheet and report over a whole store; see store_report.h.
#include "store/store_report.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <map>

#include "core/sha256.h"
#include "io/output_dir.h"
#include "report/datasheet.h"
#include "report/tool_info.h"
#include "report/html_report.h"
#include "stages/stage.h"
#include "store/history.h"

namespace prefsift::store {
namespace {

using Json = nlohmann::ordered_json;

constexpr const char* kSummaryFile = "store-summary.json";

Json Get(const Json& j, const char* key) { return j.is_object() && j.contains(key) ? j[key] : Json(nullptr); }

uint64_t Count(const Json& j, const char* key) {
  Json v = Get(j, key);
  return v.is_number_unsigned() ? v.get<uint64_t>() : v.is_number_integer() && v.get<int64_t>() > 0 ? v.get<uint64_t>() : 0;
}

// Stage order for rejects: ingest, the pipeline's stages, the store's own
// checks, then any other name alphabetically.
int StageRank(const std::string& stage) {
  if (stage == "ingest") return 0;
  const auto& all = AllStages();
  for (size_t k = 0; k < all.size(); ++k) {
    if (stage == all[k].name) return static_cast<int>(k) + 1;
  }
  if (stage == "store") return static_cast<int>(all.size()) + 1;
  return static_cast<int>(all.size()) + 2;
}

Json RejectsByStage(const Json& by_reason) {
  std::map<std::string, Json> stages;
  std::map<std::string, uint64_t> totals;
  if (by_reason.is_object()) {
    for (auto it = by_reason.begin(); it != by_reason.end(); ++it) {
      const std::string& key = it.key();  // "stage/reason"
      size_t slash = key.find('/');
      std::string stage = slash == std::string::npos ? "?" : key.substr(0, slash);
      std::string reason = slash == std::string::npos ? key : key.substr(slash + 1);
      uint64_t n = it.value().is_number_unsigned() ? it.value().get<uint64_t>() : 0;
      if (!stages.count(stage)) stages[stage] = Json::object();
      stages[stage][reason] = n;
      totals[stage] += n;
    }
  }
  std::vector<std::string> order;
  for (const auto& [stage, _] : stages) order.push_back(stage);
  std::stable_sort(order.begin(), order.end(), [](const std::string& a, const std::string& b) {
    return StageRank(a) != StageRank(b) ? StageRank(a) < StageRank(b) : a < b;
  });
  Json out = Json::array();
  for (const auto& stage : order) {
    out.push_back(Json{{"stage", stage}, {"rejected", totals[stage]}, {"by_reason", stages[stage]}});
  }
  return out;
}

Json Row(const std::string& name, double ratio, const Json& m) {
  return Json{{"name", name},
              {"ratio", ratio},
              {"groups", Count(m, "groups")},
              {"records", Count(m, "records")},
              {"share", Get(m, "share").is_number() ? Get(m, "share") : Json(0.0)}};
}

// The split section: the configured splits in order with their target
// ratios (defaults as in src/stages/split/split_stage.cc), measured over the store.
Json SplitSection(const Json& cum) {
  Json config = Get(Get(cum, "settings"), "split");
  std::vector<std::pair<std::string, double>> targets = {{"train", 0.8}, {"valid", 0.1}, {"test", 0.1}};
  Json conf_splits = Get(config, "splits");
  if (conf_splits.is_object() && !conf_splits.empty()) {
    targets.clear();
    for (auto it = conf_splits.begin(); it != conf_splits.end(); ++it) {
      targets.emplace_back(it.key(), it.value().is_number() ? it.value().get<double>() : 0.0);
    }
  }
  std::map<std::string, Json> measured;
  for (const auto& e : Get(cum, "splits")) {
    if (Get(e, "name").is_string()) measured[Get(e, "name").get<std::string>()] = e;
  }
  Json splits = Json::array();
  for (const auto& [name, ratio] : targets) {
    const Json m = measured.count(name) ? measured[name] : Json::object();
    splits.push_back(Row(name, ratio, m));
    measured.erase(name);
  }
  for (const auto& [name, m] : measured) splits.push_back(Row(name, 0.0, m));  // not named by the settings (not expected)
  Json tie = Get(config, "tie_by");
  if (!tie.is_array()) tie = Json::array({"prompt", "near", "thread"});
  Json checks = Get(cum, "split_checks");
  return Json{{"tie_by", tie},
              {"assignment", "hash of the group key against the cumulative ratios for a new group; a batch record tied "
                             "to a stored group inherits its split; stored groups never move (docs/store.md)"},
              {"splits", splits},
              {"checks", checks.is_object() ? checks : Json::object()}};
}

Json Batches(const Json& cum) {
  Json out = Json::array();
  for (const auto& b : Get(cum, "batches")) {
    Json counts = Get(b, "counts");
    Json inputs = Json::array();
    for (const auto& in : Get(b, "inputs")) inputs.push_back(Json{{"name", Get(in, "name")}, {"sha256", Get(in, "sha256")}});
    out.push_back(Json{{"batch", Get(b, "batch")},
                       {"added_at", Get(b, "added_at")},
                       {"records_in", Get(b, "entries")},
                       {"kept", Get(b, "kept")},
                       {"rejected", Get(b, "rejected")},
                       {"stored", Get(b, "stored")},
                       {"group_conflict_policy", Get(counts, "group_conflict_policy").is_string()
                                                     ? Get(counts, "group_conflict_policy") : Json("reject")},
                       {"group_conflict_components", Count(counts, "group_conflict_components")},
                       {"store_group_conflicts", Count(counts, "store_group_conflicts")},
                       {"records_joined_first", Count(counts, "records_joined_first")},
                       {"plan_sha256", Get(b, "plan_sha256")},
                       {"inputs", inputs},
                       {"eval_sets", Get(b, "eval_sets").is_array() ? Get(b, "eval_sets") : Json::array()}});
  }
  return out;
}

}  // namespace

Json StoreAsRunSummary(const Json& cum) {
  const Json totals = Get(cum, "totals");
  const uint64_t entries = Count(totals, "entries"), kept = Count(totals, "kept"), rejected = Count(totals, "rejected");
  const Json batches = Batches(cum);
  Json s;
  s["whole_store"] = Json{
      {"scope", "whole store: " + std::to_string(batches.size()) + " batch" + (batches.size() == 1 ? "" : "es") + " in " +
                    (Get(cum, "store").is_string() ? Get(cum, "store").get<std::string>() : std::string("?"))},
      {"store", Get(cum, "store")},
      {"batch_count", batches.size()},
      {"content_sha256", Get(cum, "content_sha256")},
      {"store_counts", Get(totals, "store")},
      {"evaluation_sets", Get(cum, "evaluation_sets")},
      {"batches", batches}};
  s["ledger"] = Json{{"records_in", entries},
                     {"kept", kept},
                     {"rejected", rejected},
                     {"balanced", kept + rejected == entries},
                     {"note", "summed over batches; each batch's own ledger balanced when it was added"}};
  Json inputs = Json::array();
  for (const auto& b : batches) {
    inputs.push_back(Json{{"name", "batch " + Get(b, "batch").dump()}, {"records_in", Get(b, "records_in")},
                          {"kept", Get(b, "kept")}});
  }
  s["inputs"] = std::move(inputs);
  Json rejects = RejectsByStage(Get(totals, "rejected_by_reason"));
  s["rejects_by_stage"] = rejects;
  // Stage sections: those the store knows over every batch, and a pointer to
  // the batches for any other stage that rejected records.
  Json stages = Json::object();
  for (const auto& r : rejects) {
    std::string st = r["stage"].get<std::string>();
    if (st != "ingest") stages[st] = Json{{"note", "per batch: each batch's summary.json"}};
  }
  Json near = Get(cum, "near");
  if (near.is_object()) stages["near"] = near;
  stages["split"] = SplitSection(cum);
  stages["store"] = Get(totals, "store");
  // Pipeline order for the preprocessing table.
  Json ordered = Json::object();
  std::vector<std::string> names;
  for (auto it = stages.begin(); it != stages.end(); ++it) names.push_back(it.key());
  std::stable_sort(names.begin(), names.end(), [](const std::string& a, const std::string& b) {
    return StageRank(a) != StageRank(b) ? StageRank(a) < StageRank(b) : a < b;
  });
  for (const auto& n : names) ordered[n] = stages[n];
  s["stages"] = std::move(ordered);
  Json settings = Get(cum, "settings");
  s["settings"] = Json{{"normalize", Get(settings, "normalize")}};
  s["gate"] = Json{{"verdict", "per batch"},
                   {"checks", Json::array()},
                   {"note", "each batch passed its own gate when it was added; a batch that fails its gate is not "
                            "added to the store (docs/gate.md, docs/store.md)"}};
  Json prov_batches = Json::array();
  for (const auto& b : batches) {
    prov_batches.push_back(Json{{"batch", Get(b, "batch")}, {"added_at", Get(b, "added_at")},
                                {"plan_sha256", Get(b, "plan_sha256")}, {"inputs", Get(b, "inputs")},
                                {"eval_sets", Get(b, "eval_sets")}});
  }
  s["provenance"] = Json{{"tool", ToolInfo()},
                         {"time", ProvenanceTime()},
                         {"store", Get(cum, "store")},
                         {"store_content_sha256", Get(cum, "content_sha256")},
                         {"batches", std::move(prov_batches)},
                         {"summary_file", kSummaryFile},
                         {"outputs_note", "store-summary.json is hashed in the datasheet; the datasheet and report.html "
                                          "cannot list their own digests"}};
  return s;
}

Status WriteStoreReport(const StoreReportOptions& o, FileSystem* fs) {
  if (o.out_dir.empty()) return Status::Usage("store-report: --out FOLDER is required");
  Json provenance = o.plan ? o.plan->provenance : Json::object();
  if (Status s = ValidateProvenance(provenance); !s.ok()) return s;
  Json cum;
  if (Status s = CumulativeSummary(o.store_path, &cum); !s.ok()) return s;
  const std::string summary_text = cum.dump(2) + "\n";
  const Json summary = StoreAsRunSummary(cum);
  // Settings "in the plan" are the ones the store is bound to (meta config).
  Json bound = Get(cum, "settings");
  Json plan_stages = Json::object();
  for (const char* k : {"near", "split"}) {
    if (Get(bound, k).is_object()) plan_stages[k] = bound[k];
  }
  Json sheet = BuildDatasheet(provenance, plan_stages, summary, Sha256Hex(summary_text));
  if (Status clear = CheckOutputClear(o.out_dir, {{o.store_path, "store"}}); !clear.ok()) return clear;
  auto out = OutputDir::Begin(fs, o.out_dir, o.overwrite);
  if (!out.ok()) return out.status();
  Status s = out.value()->Write(kSummaryFile, summary_text);
  if (s.ok()) s = out.value()->Write("datasheet.json", sheet.dump(2) + "\n");
  if (s.ok()) s = out.value()->Write("datasheet.md", DatasheetMarkdown(sheet));
  if (s.ok()) s = out.value()->Write("report.html", RenderHtmlReport(summary, sheet));
  if (s.ok()) s = out.value()->Commit();
  return s;
}

}  // namespace prefsift::store
