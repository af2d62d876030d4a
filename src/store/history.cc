// Reading a store; see history.h.
#include "store/history.h"

#include <nlohmann/json.hpp>

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <map>

#include "store/store_db.h"

namespace prefsift::store {
namespace {

using Json = nlohmann::ordered_json;

Result<std::unique_ptr<StoreDb>> OpenExisting(const std::string& path) {
  std::error_code ec;
  if (!std::filesystem::exists(path, ec)) return Status::Input("store " + path + " does not exist");
  return StoreDb::Open(path, 30000, /*create=*/false);
}

}  // namespace

Result<std::string> HistoryTable(const std::string& store_path) {
  auto db = OpenExisting(store_path);
  if (!db.ok()) return db.status();
  auto q = db.value()->Prepare(
      "SELECT batch, added_at, records, kept, rejected, stored, plan_digest, inputs FROM batches ORDER BY batch");
  if (!q.ok()) return q.status();
  std::string out = "batch  added_at              records     kept  rejected   stored  plan      inputs (sha256)\n";
  Status err;
  while (q.value()->Step(&err)) {
    Statement& s = *q.value();
    Json inputs = Json::parse(s.Text(7), nullptr, false);
    std::string ins;
    if (inputs.is_array()) {
      for (const auto& in : inputs) {
        ins += (ins.empty() ? "" : ", ") + in.value("name", std::string("?")) + " " +
               in.value("sha256", std::string("")).substr(0, 12);
      }
    }
    std::string plan = s.Text(6).substr(0, 8);
    char line[512];
    std::snprintf(line, sizeof line, "%5lld  %-20s %8lld %8lld %9lld %8lld  %-8s  ", static_cast<long long>(s.Int(0)),
                  s.Text(1).c_str(), static_cast<long long>(s.Int(2)), static_cast<long long>(s.Int(3)),
                  static_cast<long long>(s.Int(4)), static_cast<long long>(s.Int(5)), plan.empty() ? "-" : plan.c_str());
    out += line + ins + "\n";
  }
  if (!err.ok()) return err;
  return out;
}

namespace {

// The store's own counts, summed over batches (docs/store.md).
constexpr const char* kStoreCounts[] = {"store_duplicates",      "store_label_conflicts",
                                        "store_group_conflicts", "group_conflict_components",
                                        "records_joined_first",  "records_inheriting_a_split",
                                        "new_groups",            "stored_clusters_merged",
                                        "stored_groups_merged"};

// Every batch row, in order, and the totals over them.
Status BatchesAndTotals(StoreDb& db, Json* batches_out, Json* totals_out, uint64_t* kept_out) {
  Json batches = Json::array();
  uint64_t entries = 0, kept = 0, rejected = 0, records = 0;
  std::map<std::string, uint64_t> by_reason;
  std::map<std::string, uint64_t> store_counts;
  for (const char* k : kStoreCounts) store_counts[k] = 0;
  auto q = db.Prepare(
      "SELECT batch, added_at, plan_digest, inputs_digest, inputs, eval_sets, first_seq, records, entries, kept, "
      "rejected, stored, counts FROM batches ORDER BY batch");
  if (!q.ok()) return q.status();
  Status err;
  while (q.value()->Step(&err)) {
    Statement& s = *q.value();
    Json counts = Json::parse(s.Text(12), nullptr, false);
    Json b{{"batch", s.Int(0)},
           {"added_at", s.Text(1)},
           {"plan_sha256", s.Text(2)},
           {"inputs_sha256", s.Text(3)},
           {"inputs", Json::parse(s.Text(4), nullptr, false)},
           {"eval_sets", Json::parse(s.Text(5), nullptr, false)},
           {"first_record_number", s.Int(6)},
           {"records", s.Int(7)},
           {"entries", s.Int(8)},
           {"kept", s.Int(9)},
           {"rejected", s.Int(10)},
           {"stored", s.Int(11)},
           {"counts", counts}};
    entries += static_cast<uint64_t>(s.Int(8));
    kept += static_cast<uint64_t>(s.Int(9));
    rejected += static_cast<uint64_t>(s.Int(10));
    records += static_cast<uint64_t>(s.Int(7));
    for (const char* k : kStoreCounts) {
      if (counts.is_object() && counts.contains(k) && counts[k].is_number_unsigned()) {
        store_counts[k] += counts[k].get<uint64_t>();
      }
    }
    if (counts.is_object() && counts.contains("rejected_by_reason")) {
      for (auto it = counts["rejected_by_reason"].begin(); it != counts["rejected_by_reason"].end(); ++it) {
        by_reason[it.key()] += it.value().get<uint64_t>();
      }
    }
    batches.push_back(std::move(b));
  }
  if (!err.ok()) return err;
  Json totals{{"batches", batches.size()}, {"entries", entries}, {"records", records}, {"kept", kept},
              {"rejected", rejected}};
  Json reasons = Json::object();
  for (const auto& [k, v] : by_reason) reasons[k] = v;
  totals["rejected_by_reason"] = std::move(reasons);
  Json store_totals = Json::object();
  for (const char* k : kStoreCounts) store_totals[k] = store_counts[k];
  totals["store"] = std::move(store_totals);
  *batches_out = std::move(batches);
  *totals_out = std::move(totals);
  *kept_out = kept;
  return Status::Ok();
}

// Splits, from the records table (kept records only).
Result<Json> SplitCounts(StoreDb& db, uint64_t kept) {
  Json splits = Json::array();
  auto q = db.Prepare(
      "SELECT split, COUNT(*), COUNT(DISTINCT grp) FROM records WHERE kept = 1 GROUP BY split ORDER BY split");
  if (!q.ok()) return q.status();
  Status err;
  while (q.value()->Step(&err)) {
    double share = kept ? static_cast<double>(q.value()->Int(1)) / static_cast<double>(kept) : 0.0;
    splits.push_back(Json{{"name", q.value()->Text(0)}, {"records", q.value()->Int(1)}, {"groups", q.value()->Int(2)},
                          {"share", std::round(share * 1e6) / 1e6}});
  }
  if (!err.ok()) return err;
  return splits;
}

// Checks over the whole store: a group is never split; a prompt can sit in
// two splits only when a group conflict was resolved by join-first.
Status SplitChecks(StoreDb& db, Json* j) {
  auto q = db.Prepare(
      "SELECT (SELECT COUNT(*) FROM (SELECT grp FROM records WHERE kept = 1 GROUP BY grp "
      "HAVING COUNT(DISTINCT split) > 1)), "
      "(SELECT COUNT(*) FROM (SELECT prompt FROM records WHERE kept = 1 GROUP BY prompt "
      "HAVING COUNT(DISTINCT split) > 1))");
  if (!q.ok()) return q.status();
  Status err;
  if (q.value()->Step(&err)) {
    (*j)["split_checks"] = Json{{"groups_spanning_splits", q.value()->Int(0)},
                                {"prompts_split_apart", q.value()->Int(1)},
                                {"scope", "kept records of every batch"}};
  }
  return err;
}

// Near-duplicate cluster sizes over the store.
Result<Json> NearClusterSizes(StoreDb& db) {
  auto q = db.Prepare(
      "SELECT n, COUNT(*) FROM (SELECT cluster, COUNT(*) AS n FROM records GROUP BY cluster HAVING n > 1) "
      "GROUP BY n ORDER BY n");
  if (!q.ok()) return q.status();
  Status err;
  Json hist = Json::object();
  uint64_t count = 0, in = 0;
  while (q.value()->Step(&err)) {
    hist[std::to_string(q.value()->Int(0))] = q.value()->Int(1);
    count += static_cast<uint64_t>(q.value()->Int(1));
    in += static_cast<uint64_t>(q.value()->Int(0) * q.value()->Int(1));
  }
  if (!err.ok()) return err;
  return Json{{"clusters", count}, {"records_in_clusters", in}, {"cluster_sizes", hist},
              {"scope", "records that passed the exact checks (kept or rejected later), as in a full run"}};
}

}  // namespace

Status CumulativeSummary(const std::string& store_path, Json* out) {
  auto opened = OpenExisting(store_path);
  if (!opened.ok()) return opened.status();
  StoreDb& db = *opened.value();
  Json j;
  j["store"] = store_path;
  auto schema = db.Meta("schema_version");
  j["schema_version"] = schema.ok() ? schema.value() : "";
  auto config = db.Meta("config");
  if (config.ok() && !config.value().empty()) j["settings"] = Json::parse(config.value(), nullptr, false);
  Json batches, totals;
  uint64_t kept = 0;
  if (Status s = BatchesAndTotals(db, &batches, &totals, &kept); !s.ok()) return s;
  // Evaluation sets: the same digests in every batch, or a note.
  bool eval_same = true;
  for (size_t k = 1; k < batches.size(); ++k) eval_same = eval_same && batches[k]["eval_sets"] == batches[0]["eval_sets"];
  j["totals"] = std::move(totals);
  auto splits = SplitCounts(db, kept);
  if (!splits.ok()) return splits.status();
  j["splits"] = std::move(splits).value();
  if (Status s = SplitChecks(db, &j); !s.ok()) return s;
  auto clusters = NearClusterSizes(db);
  if (!clusters.ok()) return clusters.status();
  j["near"] = std::move(clusters).value();
  j["evaluation_sets"] = Json{{"same_in_every_batch", eval_same},
                              {"note", eval_same ? "every batch was checked against the same evaluation files"
                                                 : "the evaluation files changed between batches: records of earlier "
                                                   "batches were not checked against the later files"}};
  j["batches"] = std::move(batches);
  auto digest = db.ContentDigest();
  if (!digest.ok()) return digest.status();
  j["content_sha256"] = digest.value();
  *out = std::move(j);
  return Status::Ok();
}

Result<std::string> StoreContentDigest(const std::string& store_path) {
  auto db = OpenExisting(store_path);
  if (!db.ok()) return db.status();
  return db.value()->ContentDigest();
}

}  // namespace prefsift::store
