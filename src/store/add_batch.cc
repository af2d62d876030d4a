// Incremental runs against a store; see add_batch.h and docs/store.md.
#include "store/add_batch.h"

#include <nlohmann/json.hpp>

#include <signal.h>
#include <unistd.h>

#include <algorithm>
#include <cstdlib>
#include <ctime>
#include <functional>
#include <map>
#include <optional>
#include <set>
#include <span>
#include <unordered_map>

#include "core/file_digest.h"
#include "core/file_system.h"
#include "core/sha256.h"
#include "core/source_date.h"
#include "io/output_dir.h"
#include "sketch/clusters.h"
#include "sketch/lsh.h"
#include "sketch/minhash.h"
#include "sketch/union_find.h"
#include "stages/annotators/annotators_stage.h"
#include "stages/exact/exact_stage.h"
#include "stages/prior_join.h"
#include "stages/split/split_stage.h"
#include "pipeline/part_commands.h"
#include "pipeline/pipeline.h"
#include "stages/stage.h"
#include "store/store_db.h"

namespace prefsift::store {
namespace {

using Json = nlohmann::ordered_json;

enum { kTiePrompt = 0, kTieNear = 1, kTieThread = 2, kTieKinds = 5 };

Hash128 FromBlob(std::string_view b) {
  Hash128 h;
  for (size_t k = 0; k < 8 && k < b.size(); ++k) h.hi = (h.hi << 8) | static_cast<uint8_t>(b[k]);
  for (size_t k = 8; k < 16 && k < b.size(); ++k) h.lo = (h.lo << 8) | static_cast<uint8_t>(b[k]);
  return h;
}

// The split stage's names and ties (its own parsing: SplitShapeOf), and the
// settings a store cannot grow with.
Result<SplitShape> ReadSplitView(const Plan& plan) {
  const Json& s = StageSettings(plan, "split");
  if (s.contains("enabled") && s["enabled"].is_boolean() && !s["enabled"].get<bool>()) {
    return Status::Usage("store: the split stage must run for a store (stages.split.enabled is false)");
  }
  auto shape = SplitShapeOf(plan);
  if (!shape.ok()) return shape.status();
  const SplitShape& v = shape.value();
  if (v.stratify_source) {
    return Status::Usage("store: stages.split.stratify_by \"source\" cuts by ranks over all data and cannot grow "
                         "batch by batch; use \"none\" with a store (docs/store.md)");
  }
  const Json& n = StageSettings(plan, "near");
  if (n.contains("verify") && n["verify"] == "exact") {
    return Status::Usage("store: stages.near.verify \"exact\" needs every stored shingle set; use \"estimate\" with a "
                         "store (docs/store.md)");
  }
  const Json& e = StageSettings(plan, "exact");
  if (e.contains("enabled") && e["enabled"].is_boolean() && !e["enabled"].get<bool>()) {
    return Status::Usage("store: the exact stage must run for a store (stages.exact.enabled is false)");
  }
  return v;
}

// The settings a store is bound to: changing them between batches would make
// stored facts incomparable with new ones.
Json BoundConfig(const Plan& plan) {
  Json near = StageSettings(plan, "near");
  for (const char* k : {"enabled", "max_per_cluster", "candidates", "candidate_threshold", "candidate_ngram"}) {
    near.erase(k);
  }
  Json split = StageSettings(plan, "split");
  split.erase("previous");
  split.erase("enabled");
  return Json{{"normalize", {{"strip_punctuation", plan.normalize.strip_punctuation}}},
              {"near", near},
              {"split", split}};
}

const char* PolicyName(ConflictPolicy p) { return p == ConflictPolicy::kJoinFirst ? "join-first" : "reject"; }

// The store as prior data for the stages (stages/prior_data.h): read-only
// queries over the database, inside the batch's transaction.
class StorePriorData : public PriorData {
 public:
  StorePriorData(StoreDb* db, ConflictPolicy policy, int64_t first_seq)
      : db_(db), policy_(policy), first_seq_(first_seq) {}

  Status Prepare() {
    auto c = db_->Prepare("SELECT judgment, id, batch FROM records WHERE comparison = ?");
    auto b = db_->Prepare("SELECT seq FROM bands WHERE bkey = ?");
    auto g = db_->Prepare("SELECT s.sig, r.cluster FROM signatures s JOIN records r ON r.seq = s.seq WHERE s.seq = ?");
    auto gc = db_->Prepare(
        "SELECT DISTINCT g.grp, g.split, g.gkey FROM records r JOIN groups g ON g.grp = r.grp "
        "WHERE r.cluster = ? AND r.kept = 1 ORDER BY g.grp");
    auto t = db_->Prepare(
        "SELECT t.grp, g.split, g.gkey, g.first_batch FROM ties t JOIN groups g ON g.grp = t.grp WHERE t.kind = ? AND t.tkey = ?");
    for (auto* r : {&c, &b, &g, &gc, &t}) {
      if (!r->ok()) return r->status();
    }
    comparison_ = std::move(c).value();
    band_ = std::move(b).value();
    signature_ = std::move(g).value();
    cluster_groups_ = std::move(gc).value();
    tie_ = std::move(t).value();
    return Status::Ok();
  }

  const std::string& where() const override { return db_->path(); }
  int64_t first_seq() const override { return first_seq_; }
  PriorConflictPolicy conflict_policy() const override {
    return policy_ == ConflictPolicy::kJoinFirst ? PriorConflictPolicy::kJoinFirst : PriorConflictPolicy::kReject;
  }

  Result<std::optional<StoredComparison>> FindComparison(const Hash128& comparison) const override {
    std::string kb = HashBlob(comparison);
    Statement& q = *comparison_;
    q.BindBlob(1, kb.data(), kb.size());
    Status err;
    std::optional<StoredComparison> out;
    if (q.Step(&err)) out = StoredComparison{FromBlob(q.Blob(0)), q.Text(1), q.Int(2)};
    q.Reset();
    if (!err.ok()) return err;
    return out;
  }

  Result<std::string> StoredBanding() const override { return db_->Meta("near_banding"); }

  Status StoredInBand(int64_t band_row, std::vector<int64_t>* seqs) const override {
    Statement& q = *band_;
    q.Bind(1, band_row);
    Status err;
    while (q.Step(&err)) seqs->push_back(q.Int(0));
    q.Reset();
    return err;
  }

  Result<std::optional<SignatureAndCluster>> StoredSignature(int64_t seq) const override {
    Statement& q = *signature_;
    q.Bind(1, seq);
    Status err;
    std::optional<SignatureAndCluster> out;
    if (q.Step(&err)) out = SignatureAndCluster{std::string(q.Blob(0)), q.Int(1)};
    q.Reset();
    if (!err.ok()) return err;
    return out;
  }

  Status GroupsOfCluster(int64_t cluster, std::vector<StoredGroup>* groups) const override {
    Statement& q = *cluster_groups_;
    q.Bind(1, cluster);
    Status err;
    while (q.Step(&err)) groups->push_back(StoredGroup{q.Int(0), q.Text(1), std::string(q.Blob(2)), 0});
    q.Reset();
    return err;
  }

  Result<std::optional<StoredGroup>> GroupTiedBy(int kind, const std::string& key) const override {
    Statement& q = *tie_;
    q.Bind(1, kind).BindBlob(2, key.data(), key.size());
    Status err;
    std::optional<StoredGroup> out;
    if (q.Step(&err)) out = StoredGroup{q.Int(0), q.Text(1), std::string(q.Blob(2)), q.Int(3)};
    q.Reset();
    if (!err.ok()) return err;
    return out;
  }

 private:
  StoreDb* db_;
  ConflictPolicy policy_;
  int64_t first_seq_;
  std::unique_ptr<Statement> comparison_, band_, signature_, cluster_groups_, tie_;
};

// Receives the batch's typed results after every stage has decided (the
// PriorJoin the stages published, the near stage's signatures) and persists
// them; reports the store's section of summary.json and store_conflicts.jsonl.
// It decides nothing and is called between no stages.
class StoreCompanion : public RunCompanion {
 public:
  StoreCompanion(StoreDb* db, const Plan& plan, SplitShape view, ConflictPolicy policy, int64_t batch, int64_t first_seq)
      : db_(db), plan_(plan), view_(std::move(view)), policy_(policy), batch_(batch), first_seq_(first_seq) {}
  std::string name() const override { return "store"; }

  Status Decide(StageContext& ctx) override {
    RunState& st = ctx.run;
    sig_ = ctx.results.Find<NearSignatures>();
    join_ = ctx.results.Find<PriorJoin>();
    if (!join_ || !join_->groups_done) return Status::Usage("store: the split stage did not run; a store needs it");
    agreement_ = BatchAgreement(plan_, st);  // this batch's annotator agreement (docs/annotators.md)
    Status s = Write(st);
    if (s.ok()) counts_ = BuildCounts();  // read after the run, when the results are gone
    return s;
  }

  void Report(const RunState&, Json* s) const override {
    const PriorJoin& j = *join_;
    (*s)["store"] = db_->path();
    (*s)["batch"] = batch_;
    (*s)["first_record_number"] = first_seq_;
    (*s)["exact"] = Json{{"store_duplicates", j.duplicates}, {"store_label_conflicts", j.label_conflicts}};
    (*s)["near"] = Json{{"records_matched_to_stored_clusters", j.near_matched},
                        {"stored_clusters_merged", clusters_merged_},
                        {"stored_candidates_checked", j.candidates_checked}};
    (*s)["groups"] = Json{{"records_inheriting_a_split", j.inherited},
                          {"records_in_new_groups", in_new_groups_},
                          {"new_groups", new_groups_},
                          {"stored_groups_merged", groups_merged_}};
    Json conflicts = Json::array();
    for (size_t k = 0; k < j.conflicts.size() && k < 50; ++k) conflicts.push_back(j.conflicts[k].ToJson());
    (*s)["group_conflicts"] = Json{{"policy", PolicyName(policy_)},
                                   {"components", j.conflicts.size()},
                                   {"records_rejected", j.conflict_records},
                                   {"records_joined_first", j.joined.size()},
                                   {"first", std::move(conflicts)},
                                   {"file", "store_conflicts.jsonl"}};
    (*s)["records_stored"] = stored_;
    (*s)["note"] = "records already in the store are not re-read; stored groups keep their split (docs/store.md)";
  }

  Status WriteOutputs(const RunState&, OutputDir& out) const override {
    auto f = out.Create("store_conflicts.jsonl");
    if (!f.ok()) return f.status();
    for (const auto& c : join_->conflicts) {
      Status s = f.value()->Append(c.ToJson().dump() + "\n");
      if (!s.ok()) return s;
    }
    return f.value()->Close();
  }

 private:
  int64_t Seq(size_t i) const { return first_seq_ + static_cast<int64_t>(i); }

  // 4. The batch's facts into the store (inside the caller's transaction), in
  // steps: counts for the batch row, the bound configuration, merges of stored
  // groups and clusters the batch bridged, new groups, then the records.
  Status Write(RunState& st) {
    CountBatch(st);
    std::map<int64_t, int64_t> parent;  // stored group -> the group it merged into
    std::vector<int64_t> new_grp;
    Status s = WriteConfig();
    if (s.ok()) s = MergeGroups(&parent);
    if (s.ok()) s = MergeClusters();
    if (s.ok()) s = InsertNewGroups(st, &new_grp);
    if (s.ok()) s = InsertRecords(st, parent, new_grp);
    return s;
  }

  void CountBatch(RunState& st) {
    const size_t n = st.records.size();
    records_ = n;
    for (size_t e = 0; e < st.decisions.size(); ++e) {
      const Decision& d = st.decisions[e];
      if (d.rejected) ++rejected_by_reason_[std::string(st.StageOf(d)) + "/" + std::string(st.ReasonOf(d))];
    }
    std::map<std::string, uint64_t> by_split;
    for (size_t i = 0; i < n; ++i) {
      if (st.IsKept(i)) ++by_split[st.split_names[st.DecisionOf(i).split]];
    }
    for (const auto& [k, v] : by_split) kept_by_split_[k] = v;
  }

  Status WriteConfig() {
    const PriorJoin& j = *join_;
    Json config = BoundConfig(plan_);
    auto stored_config = db_->Meta("config");
    if (!stored_config.ok()) return stored_config.status();
    if (stored_config.value().empty()) {
      if (Status s = db_->SetMeta("config", config.dump()); !s.ok()) return s;
      if (Status s = db_->SetMeta("splits", Json(view_.names).dump()); !s.ok()) return s;
      if (!j.banding_json.empty()) {
        if (Status s = db_->SetMeta("near_banding", j.banding_json); !s.ok()) return s;
      }
    }
    return Status::Ok();
  }

  Status MergeGroups(std::map<int64_t, int64_t>* parent_out) {
    const PriorJoin& j = *join_;
    std::map<int64_t, int64_t>& parent = *parent_out;
    // Group merges (union-find over stored group ids).
    std::function<int64_t(int64_t)> find = [&](int64_t g) {
      auto it = parent.find(g);
      if (it == parent.end() || it->second == g) return g;
      return it->second = find(it->second);
    };
    for (auto [a, b] : j.group_merges) {
      int64_t ra = find(a), rb = find(b);
      if (ra == rb) continue;
      if (rb < ra) std::swap(ra, rb);
      parent[rb] = ra;
    }
    for (const auto& [g, p] : parent) {
      int64_t t = find(g);
      if (t == g) continue;
      ++groups_merged_;
      for (const char* sql : {"UPDATE records SET grp = ?1 WHERE grp = ?2", "UPDATE ties SET grp = ?1 WHERE grp = ?2",
                              "DELETE FROM groups WHERE grp = ?2"}) {
        auto u = db_->Prepare(sql);
        if (!u.ok()) return u.status();
        u.value()->Bind(1, t).Bind(2, g);
        if (Status s = u.value()->Run(); !s.ok()) return s;
      }
    }
    return Status::Ok();
  }

  Status MergeClusters() {
    const PriorJoin& j = *join_;
    // Cluster merges.
    for (const auto& [target, other] : j.cluster_merges) {
      ++clusters_merged_;
      auto u = db_->Prepare("UPDATE records SET cluster = ?1 WHERE cluster = ?2");
      if (!u.ok()) return u.status();
      u.value()->Bind(1, target).Bind(2, other);
      if (Status s = u.value()->Run(); !s.ok()) return s;
      auto d = db_->Prepare("DELETE FROM ties WHERE kind = 1 AND tkey = ?");
      if (!d.ok()) return d.status();
      std::string ob = ClusterBlob(other);
      d.value()->BindBlob(1, ob.data(), ob.size());
      if (Status s = d.value()->Run(); !s.ok()) return s;
      if (view_.tie[kTieNear]) {
        auto t = db_->Prepare(
            "INSERT OR IGNORE INTO ties(kind, tkey, grp) SELECT 1, ?1, grp FROM records "
            "WHERE cluster = ?2 AND kept = 1 AND grp IS NOT NULL ORDER BY seq LIMIT 1");
        if (!t.ok()) return t.status();
        std::string tb = ClusterBlob(target);
        t.value()->BindBlob(1, tb.data(), tb.size()).Bind(2, target);
        if (Status s = t.value()->Run(); !s.ok()) return s;
      }
    }
    return Status::Ok();
  }

  Status InsertNewGroups(RunState& st, std::vector<int64_t>* new_grp_out) {
    const PriorJoin& j = *join_;
    std::vector<int64_t>& new_grp = *new_grp_out;
    // New groups: key = smallest prompt hash, as the split stage computes it.
    new_grp.assign(j.new_groups.size(), -1);
    auto ig = db_->Prepare("INSERT INTO groups(gkey, split, first_batch) VALUES(?, ?, ?)");
    if (!ig.ok()) return ig.status();
    for (size_t k = 0; k < j.new_groups.size(); ++k) {
      const auto& list = j.new_groups[k];
      bool any = false;
      Hash128 key;
      for (uint32_t i : list) {
        if (!st.IsKept(i)) continue;
        if (!any || st.records[i].prompt_hash < key) key = st.records[i].prompt_hash;
        any = true;
      }
      if (!any) continue;
      std::string kb = HashBlob(key);
      const std::string& split = st.split_names[st.DecisionOf(list.front()).split];
      ig.value()->BindBlob(1, kb.data(), kb.size()).Bind(2, split).Bind(3, batch_);
      if (Status s = ig.value()->Run(); !s.ok()) return s;
      new_grp[k] = db_->LastInsertId();
      ++new_groups_;
      in_new_groups_ += list.size();
    }
    return Status::Ok();
  }

  Status InsertRecords(RunState& st, std::map<int64_t, int64_t>& parent, const std::vector<int64_t>& new_grp) {
    const PriorJoin& j = *join_;
    const size_t n = st.records.size();
    // Records, signatures, band keys, ties.
    auto ir = db_->Prepare(
        "INSERT INTO records(seq, batch, id, prompt, comparison, judgment, cluster, kept, grp, split) "
        "VALUES(?, ?, ?, ?, ?, ?, ?, ?, ?, ?)");
    auto is = db_->Prepare("INSERT INTO signatures(seq, sig) VALUES(?, ?)");
    auto ib = db_->Prepare("INSERT OR IGNORE INTO bands(bkey, seq) VALUES(?, ?)");
    auto it = db_->Prepare("INSERT OR IGNORE INTO ties(kind, tkey, grp) VALUES(?, ?, ?)");
    for (auto* p : {&ir, &is, &ib, &it}) {
      if (!p->ok()) return p->status();
    }
    const bool near_ran = sig_ != nullptr;
    const uint32_t K = sig_->slots;
    size_t half = 0;
    std::vector<std::pair<int64_t, int64_t>> bands;  // (band key, seq)
    for (size_t i = 0; i < n; ++i) {
      if (!j.stored_ok[i]) continue;
      bool kept = st.IsKept(i);
      int64_t grp = -1;
      if (kept) {
        if (j.group_target[i] >= 0) grp = FindTarget(parent, j.group_target[i]);
        else if (j.new_group_of[i] >= 0) grp = new_grp[static_cast<size_t>(j.new_group_of[i])];
      }
      const RecordFacts& f = st.records[i];
      std::string pb = HashBlob(f.prompt_hash), kb = HashBlob(j.key[i]), jb = HashBlob(j.judgment[i]);
      Statement& r = *ir.value();
      r.Bind(1, Seq(i)).Bind(2, batch_).Bind(3, f.id);
      r.BindBlob(4, pb.data(), pb.size()).BindBlob(5, kb.data(), kb.size()).BindBlob(6, jb.data(), jb.size());
      r.Bind(7, j.cluster[i]).Bind(8, kept ? 1 : 0);
      if (grp >= 0) r.Bind(9, grp).Bind(10, st.split_names[st.DecisionOf(i).split]);
      else r.BindNull(9).BindNull(10);
      if (Status s = r.Run(); !s.ok()) {
        return Status::Io("store " + db_->path() + ": record " + f.id + ": " + s.message());
      }
      ++stored_;
      if (near_ran) {
        is.value()->Bind(1, Seq(i)).BindBlob(2, sig_->bytes.data() + i * K, K);
        if (Status s = is.value()->Run(); !s.ok()) return s;
        for (uint32_t b = 0; b < j.bands; ++b) bands.emplace_back(BandRow(j.band_keys[i * j.bands + b]), Seq(i));
      }
      if (grp >= 0) {
        auto tie = [&](int kind, const std::string& key) {
          it.value()->Bind(1, kind).BindBlob(2, key.data(), key.size()).Bind(3, grp);
          return it.value()->Run();
        };
        Status s;
        if (view_.tie[kTiePrompt]) s = tie(kTiePrompt, pb);
        if (s.ok() && view_.tie[kTieNear]) s = tie(kTieNear, ClusterBlob(j.cluster[i]));
        const std::string* text[kTieKinds] = {nullptr, nullptr, &st.Text(f.thread_id), &st.Text(f.annotator_id),
                                              &st.Text(f.group_id)};
        for (int t = kTieThread; t < kTieKinds && s.ok(); ++t) {
          if (view_.tie[t] && !text[t]->empty()) s = tie(t, HashBlob(HashBytes(*text[t])));
        }
        if (!s.ok()) return s;
      }
      if (++half == 50) MaybeKill("mid-write");
    }
    if (half < 50) MaybeKill("mid-write");
    // Band keys in key order: inserts walk the B-tree once instead of at random.
    std::sort(bands.begin(), bands.end());
    for (const auto& [key, seq] : bands) {
      ib.value()->Bind(1, key).Bind(2, seq);
      if (Status s = ib.value()->Run(); !s.ok()) return s;
    }
    return Status::Ok();
  }


  static int64_t FindTarget(std::map<int64_t, int64_t>& parent, int64_t g) {
    for (;;) {
      auto it = parent.find(g);
      if (it == parent.end() || it->second == g) return g;
      g = it->second;
    }
  }

 public:
  // Counts for the batch row.
  uint64_t stored() const { return stored_; }
  uint64_t records() const { return records_; }
  const Json& Counts() const { return counts_; }

 private:
  Json BuildCounts() const {
    Json by_reason = Json::object();
    for (const auto& [k, v] : rejected_by_reason_) by_reason[k] = v;
    const PriorJoin& j = *join_;
    return Json{{"rejected_by_reason", by_reason}, {"kept_by_split", kept_by_split_}, {"store_duplicates", j.duplicates},
                {"store_label_conflicts", j.label_conflicts}, {"group_conflict_policy", PolicyName(policy_)},
                {"store_group_conflicts", j.conflict_records}, {"group_conflict_components", j.conflicts.size()},
                {"records_joined_first", j.joined.size()}, {"records_inheriting_a_split", j.inherited},
                {"new_groups", new_groups_}, {"stored_clusters_merged", clusters_merged_},
                {"stored_groups_merged", groups_merged_}, {"annotator_agreement", agreement_}};
  }

 private:
  const NearSignatures* sig_ = nullptr;  // the near stage's (Decide)
  const PriorJoin* join_ = nullptr;       // the stages' join with the store (Decide)
  StoreDb* db_;
  const Plan& plan_;
  SplitShape view_;
  ConflictPolicy policy_;
  int64_t batch_, first_seq_;
  Json agreement_, counts_;
  uint64_t clusters_merged_ = 0, in_new_groups_ = 0, new_groups_ = 0, groups_merged_ = 0, stored_ = 0, records_ = 0;
  std::map<std::string, uint64_t> rejected_by_reason_;
  Json kept_by_split_ = Json::object();
};

}  // namespace

void MaybeKill(const char* phase) {
  const char* at = std::getenv("PREFSIFT_TEST_KILL_AT");
  if (at && std::string(at) == phase) ::raise(SIGKILL);
}

Result<StoreSettings> StoreSettingsFromPlan(FileSystem* fs, const Plan& plan) {
  StoreSettings out;
  if (plan.plan_path.empty()) return out;
  auto text = ReadWholeFile(fs, plan.plan_path);
  Json j = Json::parse(text.ok() ? text.value() : "", nullptr, false, /*ignore_comments=*/true);
  if (!j.is_object() || !j.contains("store")) return out;
  const Json& st = j["store"];
  const std::string where = plan.plan_path + ": store";
  std::string p;
  if (st.is_string()) {
    p = st.get<std::string>();
    if (p.empty()) return Status::Usage(where + ": must be the path of the store file");
  } else if (st.is_object()) {
    for (auto it = st.begin(); it != st.end(); ++it) {
      const std::string& k = it.key();
      if (k == "$comment") continue;
      if (k == "path") {
        if (!it.value().is_string() || it.value().get<std::string>().empty()) {
          return Status::Usage(where + ".path: must be the path of the store file");
        }
        p = it.value().get<std::string>();
      } else if (k == "group_conflicts") {
        std::string v = it.value().is_string() ? it.value().get<std::string>() : "";
        if (v == "reject") out.group_conflicts = ConflictPolicy::kReject;
        else if (v == "join-first") out.group_conflicts = ConflictPolicy::kJoinFirst;
        else {
          return Status::Usage(where + ".group_conflicts: " + it.value().dump() +
                               " is not a policy (known: \"reject\", \"join-first\"; docs/store.md)");
        }
      } else {
        return Status::Usage(where + "." + k + ": unknown key (known: path, group_conflicts)");
      }
    }
  } else {
    return Status::Usage(where + ": must be the store file's path or an object {\"path\", \"group_conflicts\"}");
  }
  if (!p.empty() && p[0] != '/') {
    auto slash = plan.plan_path.rfind('/');
    if (slash != std::string::npos) p = plan.plan_path.substr(0, slash + 1) + p;
  }
  out.path = p;
  return out;
}

namespace {

// What identifies a batch: its inputs' and evaluation sets' digests.
struct BatchDigests {
  Json inputs = Json::array();
  std::string inputs_digest;  // SHA-256 over the inputs' SHA-256s
  Json evals = Json::array();
};

Result<BatchDigests> DigestBatch(const Plan& plan, FileSystem* fs) {
  BatchDigests d;
  std::string joined;
  for (const auto& in : plan.inputs) {
    auto f = DigestFile(fs, in.path);
    if (!f.ok()) return f.status();
    d.inputs.push_back(Json{{"name", in.name}, {"path", in.path}, {"sha256", f.value().sha256}});
    joined += f.value().sha256 + "\n";
  }
  d.inputs_digest = Sha256Hex(joined);
  const Json& leak = StageSettings(plan, "leakage");
  if (leak.contains("eval_sets") && leak["eval_sets"].is_array()) {
    std::string base = plan.plan_path.empty() ? "" : plan.plan_path.substr(0, plan.plan_path.rfind('/') + 1);
    for (const auto& e : leak["eval_sets"]) {
      if (!e.is_object() || !e.contains("path") || !e["path"].is_string()) continue;
      std::string p = e["path"].get<std::string>();
      if (!p.empty() && p[0] != '/') p = base + p;
      auto f = DigestFile(fs, p);
      d.evals.push_back(Json{{"name", e.value("name", "")}, {"sha256", f.ok() ? f.value().sha256 : "unreadable"}});
    }
  }
  return d;
}

// The batch already added with these inputs and this plan, if any.
Result<std::optional<int64_t>> FindAddedBatch(StoreDb& store, const std::string& inputs_digest, const Plan& plan) {
  auto q = store.Prepare("SELECT batch FROM batches WHERE inputs_digest = ? AND plan_digest = ?");
  if (!q.ok()) return q.status();
  q.value()->Bind(1, inputs_digest).Bind(2, plan.plan_digest);
  Status err;
  std::optional<int64_t> batch;
  if (q.value()->Step(&err)) batch = q.value()->Int(0);
  if (!err.ok()) return err;
  return batch;
}

// The next batch number and the first record number after the stored ones.
Result<std::pair<int64_t, int64_t>> NextBatch(StoreDb& store) {
  auto q = store.Prepare("SELECT COALESCE(MAX(batch), 0) + 1, COALESCE(MAX(first_seq + records), 0) FROM batches");
  if (!q.ok()) return q.status();
  Status err;
  std::pair<int64_t, int64_t> next{1, 0};
  if (q.value()->Step(&err)) next = {q.value()->Int(0), q.value()->Int(1)};
  if (!err.ok()) return err;
  return next;
}

Status InsertBatchRow(StoreDb& store, const Plan& plan, const BatchDigests& d, int64_t batch, int64_t first_seq,
                      const StoreCompanion& companion, const RunOutcome& run) {
  auto ib = store.Prepare(
      "INSERT INTO batches(batch, added_at, plan_digest, inputs_digest, inputs, eval_sets, first_seq, records, entries, "
      "kept, rejected, stored, counts) VALUES(?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)");
  if (!ib.ok()) return ib.status();
  Statement& b = *ib.value();
  b.Bind(1, batch).Bind(2, UtcText(NowOrSourceDate())).Bind(3, plan.plan_digest).Bind(4, d.inputs_digest);
  b.Bind(5, d.inputs.dump()).Bind(6, d.evals.dump()).Bind(7, first_seq);
  b.Bind(8, static_cast<int64_t>(companion.records()));
  b.Bind(9, static_cast<int64_t>(run.entries)).Bind(10, static_cast<int64_t>(run.kept));
  b.Bind(11, static_cast<int64_t>(run.rejected)).Bind(12, static_cast<int64_t>(companion.stored()));
  b.Bind(13, companion.Counts().dump());
  return b.Run();
}

// Decides the batch against the store with `decide` (the whole pipeline, or
// decide over parts' state files) inside one transaction, and commits the
// store when the gate passes (docs/store.md).
using DecideBatch = std::function<Result<RunOutcome>(const PipelineOptions&)>;

Result<AddOutcome> AddWith(const Plan& plan, const AddOptions& options, FileSystem* fs, const DecideBatch& decide) {
  auto settings = StoreSettingsFromPlan(fs, plan);
  if (!settings.ok()) return settings.status();
  std::string path = options.store_path.empty() ? settings.value().path : options.store_path;
  if (path.empty()) return Status::Usage("no store: pass --store FILE or set \"store\" in the plan");
  if (plan.inputs.empty()) return Status::Usage("no input files: name them on the command line or in the plan's \"inputs\"");
  auto view = ReadSplitView(plan);
  if (!view.ok()) return view.status();
  auto digests = DigestBatch(plan, fs);
  if (!digests.ok()) return digests.status();
  auto db = StoreDb::Open(path, options.wait_ms, /*create=*/true);
  if (!db.ok()) return db.status();
  StoreDb& store = *db.value();
  if (Status s = store.BeginImmediate(); !s.ok()) return s;
  MaybeKill("after-begin");
  struct Rollback {
    StoreDb* db;
    bool armed = true;
    ~Rollback() {
      if (armed) db->Rollback();
    }
  } guard{&store};
  AddOutcome outcome;
  auto added = FindAddedBatch(store, digests.value().inputs_digest, plan);
  if (!added.ok()) return added.status();
  if (added.value()) {
    outcome.already_added = true;
    outcome.batch = *added.value();
    return outcome;
  }
  auto stored_config = store.Meta("config");
  if (!stored_config.ok()) return stored_config.status();
  std::string config = BoundConfig(plan).dump();
  if (!stored_config.value().empty() && stored_config.value() != config) {
    return Status::Usage("store " + path + ": the plan's settings " + config + " differ from the store's " +
                         stored_config.value() + "; a store keeps one configuration (docs/store.md)");
  }
  auto next = NextBatch(store);
  if (!next.ok()) return next.status();
  const auto [batch, first_seq] = next.value();
  StorePriorData prior(&store, settings.value().group_conflicts, first_seq);
  if (Status s = prior.Prepare(); !s.ok()) return s;
  StoreCompanion companion(&store, plan, view.value(), settings.value().group_conflicts, batch, first_seq);
  PipelineOptions popts;
  popts.prior = &prior;
  for (const auto& info : AllStages()) popts.stages.push_back(info.name);
  popts.progress = options.progress;
  popts.table = options.table;
  popts.companion = &companion;
  popts.want_signatures = true;  // the store keeps the near stage's signatures
  popts.also_reads.push_back({path, "store"});
  // The batch row goes in from the companion's facts after the run; the
  // output folder is committed by `decide`, the store right after.
  auto run = decide(popts);
  if (!run.ok()) return run.status();
  outcome.entries = run.value().entries;
  outcome.kept = run.value().kept;
  outcome.rejected = run.value().rejected;
  outcome.gate_failed = run.value().gate_failed;
  // A batch that fails the gate is written out for review but not added: the guard rolls back.
  if (outcome.gate_failed) return outcome;
  if (Status s = InsertBatchRow(store, plan, digests.value(), batch, first_seq, companion, run.value()); !s.ok()) {
    return s;
  }
  MaybeKill("before-commit");
  if (Status s = store.Commit(); !s.ok()) return s;
  guard.armed = false;
  MaybeKill("after-commit");
  outcome.batch = batch;
  return outcome;
}

}  // namespace

Result<AddOutcome> AddBatch(const Plan& plan, const AddOptions& options, FileSystem* fs, std::FILE* log) {
  return AddWith(plan, options, fs, [&](const PipelineOptions& o) { return RunPipeline(plan, o, fs, log); });
}

Result<AddOutcome> AddBatchFromStates(const Plan& plan, const AddOptions& options,
                                      const std::vector<std::string>& state_paths, FileSystem* fs, std::FILE* log) {
  return AddWith(plan, options, fs,
                 [&](const PipelineOptions& o) { return DecideFromStates(plan, o, state_paths, fs, log); });
}

}  // namespace prefsift::store
