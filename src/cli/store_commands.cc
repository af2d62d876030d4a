// Subcommands for growing stores; see store_commands.h.
#include "cli/store_commands.h"

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include <unistd.h>

#include <cstdio>

#include "core/plan.h"
#include "io/file_system.h"
#include "io/output_dir.h"
#include "store/add_batch.h"
#include "cli/exit_codes.h"
#include "store/history.h"
#include "store/shards.h"
#include "store/store_report.h"

namespace prefsift {
namespace {

int Fail(const Status& s) {
  std::fprintf(stderr, "prefsift: %s\n", s.message().c_str());
  return ExitFor(s);
}

std::string Stem(const std::string& path) {
  std::string name = path.substr(path.find_last_of('/') + 1);
  for (const char* ext : {".gz", ".zst", ".jsonl", ".json"}) {
    size_t n = std::string(ext).size();
    if (name.size() > n && name.compare(name.size() - n, n, ext) == 0) name.resize(name.size() - n);
  }
  return name;
}

struct BatchArgs {
  std::string plan_path, out, store;
  std::vector<std::string> inputs;
  bool overwrite = false, quiet = false;
  unsigned threads = 0;
};

void AddBatchArgs(CLI::App* cmd, BatchArgs* a, bool store) {
  cmd->add_option("inputs", a->inputs,
                  "The batch's JSONL files; each takes the layout of the plan's first input (default: the plan's inputs)");
  cmd->add_option("-p,--plan", a->plan_path, "Plan file (layouts and stage settings)")->required();
  cmd->add_option("-o,--out", a->out, "Output folder for this batch (must not exist unless --overwrite)");
  cmd->add_flag("--overwrite", a->overwrite, "Replace an existing output folder (atomically, at the end)");
  cmd->add_option("--threads", a->threads, "Worker threads (default: all cores); results do not depend on it");
  cmd->add_flag("-q,--quiet", a->quiet, "No ledger table or progress on stderr");
  if (store) cmd->add_option("--store", a->store, "The store file (SQLite; created when missing; default: the plan's \"store\")");
}

Result<Plan> BatchPlan(const BatchArgs& a) {
  auto loaded = LoadPlanFile(DefaultFileSystem(), a.plan_path);
  if (!loaded.ok()) return loaded.status();
  Plan plan = std::move(loaded).value();
  if (!a.inputs.empty()) {
    if (plan.inputs.empty()) return Status::Usage("inputs on the command line take the layout of the plan's first input; the plan has none");
    InputSpec model = plan.inputs[0];  // the first input's layout (docs/store.md)
    plan.inputs.clear();
    for (const auto& path : a.inputs) {
      InputSpec spec = model;
      spec.path = path;
      spec.name = Stem(path);
      plan.inputs.push_back(spec);
    }
  }
  if (!a.out.empty()) plan.output = a.out;
  if (a.overwrite) plan.overwrite = true;
  if (a.threads) plan.threads = a.threads;
  return plan;
}

class Commands : public StoreCommands {
 public:
  explicit Commands(CLI::App* app) {
    add_ = app->add_subcommand("add", "Add a batch to a growing store: dedup against it, inherit stored splits (docs/store.md)");
    AddBatchArgs(add_, &add_args_, true);
    add_->add_option("--wait", wait_s_, "Seconds to wait while another run writes the store (default 30), then exit 3");
    add_->footer("\nExample:\n  prefsift add --store lantern.db --plan samples/store-plan.json --out round1-out round1.jsonl\n");
    history_ = app->add_subcommand("history", "List a store's batches with their digests and counts");
    history_->add_option("--store", store_, "The store file")->required();
    history_->footer("\nExample:\n  prefsift history --store lantern.db\n");
    summary_ = app->add_subcommand("store-summary", "Cumulative summary JSON of a whole store (all batches)");
    summary_->add_option("--store", store_, "The store file")->required();
    summary_->add_option("-o,--out", summary_out_, "Write the JSON here (atomically) instead of stdout");
    summary_->footer("\nExample:\n  prefsift store-summary --store lantern.db --out lantern-summary.json\n");
    report_ = app->add_subcommand("store-report",
                                  "Datasheet and HTML report of a whole store (all batches) into a new folder");
    report_->add_option("--store", report_store_, "The store file (default: the plan's \"store\")");
    report_->add_option("-o,--out", report_out_,
                        "Output folder: store-summary.json, datasheet.md, datasheet.json, report.html")->required();
    report_->add_option("-p,--plan", report_plan_, "A plan whose \"provenance\" answers the datasheet's questions");
    report_->add_flag("--overwrite", report_overwrite_, "Replace an existing output folder (atomically, at the end)");
    report_->footer("\nExample:\n  prefsift store-report --store lantern.db --out lantern-report\n");
    sign_ = app->add_subcommand("shard-sign", "Near-duplicate signatures and band keys of one shard (for `merge`)");
    AddBatchArgs(sign_, &sign_args_, false);
    sign_->footer("\nExample:\n  prefsift shard-sign --plan samples/store-plan.json --out shard1 part1.jsonl\n");
    merge_ = app->add_subcommand("merge", "Cluster near-duplicates over several shards' signatures.jsonl files");
    merge_->add_option("files", merge_files_, "signatures.jsonl files from `shard-sign`, in shard order")->required();
    merge_->add_option("-o,--out", merge_out_, "Output folder (clusters.jsonl, merge.json)")->required();
    merge_->add_flag("--overwrite", merge_overwrite_, "Replace an existing output folder");
    merge_->add_option("--threads", merge_threads_, "Worker threads; results do not depend on it");
    merge_->footer("\nExample:\n  prefsift merge shard1/signatures.jsonl shard2/signatures.jsonl --out merged\n");
  }

  int RunIfParsed() override {
    if (add_->parsed()) return Add();
    if (history_->parsed()) {
      auto t = store::HistoryTable(store_);
      if (!t.ok()) return Fail(t.status());
      std::fputs(t.value().c_str(), stdout);
      return 0;
    }
    if (summary_->parsed()) {
      nlohmann::ordered_json j;
      Status s = store::CumulativeSummary(store_, &j);
      if (!s.ok()) return Fail(s);
      std::string text = j.dump(2) + "\n";
      if (summary_out_.empty()) {
        std::fputs(text.c_str(), stdout);
        return 0;
      }
      s = WriteFileAtomically(DefaultFileSystem(), summary_out_, text);
      return s.ok() ? 0 : Fail(s);
    }
    if (report_->parsed()) return Report();
    if (sign_->parsed()) {
      auto plan = BatchPlan(sign_args_);
      if (!plan.ok()) return Fail(plan.status());
      Status s = store::ShardSign(plan.value(), DefaultFileSystem(), stderr, !sign_args_.quiet);
      if (!s.ok()) return Fail(s);
      if (!sign_args_.quiet) std::fprintf(stderr, "wrote %s/signatures.jsonl\n", plan.value().output.c_str());
      return 0;
    }
    if (merge_->parsed()) {
      auto r = store::MergeShards(merge_files_, merge_out_, merge_overwrite_, merge_threads_, DefaultFileSystem());
      if (!r.ok()) return Fail(r.status());
      std::fprintf(stderr, "%llu records, %llu clusters; wrote %s\n", static_cast<unsigned long long>(r.value().records),
                   static_cast<unsigned long long>(r.value().clusters), merge_out_.c_str());
      return 0;
    }
    return -1;
  }

 private:
  int Report() {
    store::StoreReportOptions o;
    o.store_path = report_store_;
    o.out_dir = report_out_;
    o.overwrite = report_overwrite_;
    Plan plan;
    if (!report_plan_.empty()) {
      auto loaded = LoadPlanFile(DefaultFileSystem(), report_plan_);
      if (!loaded.ok()) return Fail(loaded.status());
      plan = std::move(loaded).value();
      o.plan = &plan;
      if (o.store_path.empty()) {
        auto st = store::StoreSettingsFromPlan(DefaultFileSystem(), plan);
        if (!st.ok()) return Fail(st.status());
        o.store_path = st.value().path;
      }
    }
    if (o.store_path.empty()) return Fail(Status::Usage("store-report: pass --store FILE (or a plan with \"store\")"));
    Status s = store::WriteStoreReport(o, DefaultFileSystem());
    if (!s.ok()) return Fail(s);
    std::fprintf(stderr, "wrote %s (datasheet.md, datasheet.json, report.html, store-summary.json)\n", report_out_.c_str());
    return 0;
  }

  int Add() {
    auto plan = BatchPlan(add_args_);
    if (!plan.ok()) return Fail(plan.status());
    store::AddOptions o;
    o.store_path = add_args_.store;
    o.wait_ms = static_cast<int>(wait_s_ * 1000);
    o.progress = !add_args_.quiet && ::isatty(2);
    o.table = !add_args_.quiet;
    auto r = store::AddBatch(plan.value(), o, DefaultFileSystem(), stderr);
    if (!r.ok()) return Fail(r.status());
    return ReportAdded(r.value(), plan.value(), add_args_.quiet,
                       "added batch " + std::to_string(r.value().batch) + " to the store; wrote " +
                           plan.value().output);
  }

  CLI::App *add_, *history_, *summary_, *report_, *sign_, *merge_;
  BatchArgs add_args_, sign_args_;
  double wait_s_ = 30;
  std::string store_, summary_out_, merge_out_, report_store_, report_out_, report_plan_;
  bool report_overwrite_ = false;
  std::vector<std::string> merge_files_;
  bool merge_overwrite_ = false;
  unsigned merge_threads_ = 0;
};

}  // namespace

std::unique_ptr<StoreCommands> AddStoreCommands(CLI::App* app) { return std::make_unique<Commands>(app); }

int ReportAdded(const store::AddOutcome& oc, const Plan& plan, bool quiet, const std::string& added) {
  if (oc.already_added) {
    std::fprintf(stderr, "prefsift: these inputs with this plan were already added as batch %lld; nothing to do\n",
                 static_cast<long long>(oc.batch));
    return kExitOk;
  }
  const int code = ExitForRun({oc.entries, oc.kept, oc.rejected, oc.gate_failed, plan.strict});
  if (oc.gate_failed) {
    std::fprintf(stderr, "prefsift: the gate failed: %s holds the batch's outputs for review; the store is unchanged\n",
                 plan.output.c_str());
    return code;
  }
  if (!quiet) std::fprintf(stderr, "%s\n", added.c_str());
  if (code == kExitNothingKept) std::fprintf(stderr, "prefsift: every record of the batch was rejected (exit %d)\n", code);
  if (code == kExitStrict) {
    std::fprintf(stderr, "prefsift: --strict: %llu record(s) rejected\n", static_cast<unsigned long long>(oc.rejected));
  }
  return code;
}

}  // namespace prefsift
