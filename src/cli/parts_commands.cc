// observe, decide and apply on the command line; see parts_commands.h.
#include "cli/parts_commands.h"

#include <CLI/CLI.hpp>

#include <cstdio>
#include <string>
#include <utility>
#include <vector>

#include "cli/common_options.h"
#include "cli/exit_codes.h"
#include "io/file_system.h"
#include "pipeline/part_commands.h"
#include "pipeline/parts.h"
#include "pipeline/pipeline.h"
#ifdef PREFSIFT_HAVE_STORE
#include "cli/store_commands.h"
#endif

namespace prefsift {
namespace {

struct PartsCli {
  CommonOptions common;
  std::string parts;             // parts.json; "" = one whole-file part per input
  long long part = -1;
  std::vector<std::string> states;
  std::string decisions;
  std::string store;  // decide: add the batch to this store (docs/store.md)
  double wait_s = 30;
};

// The part numbered `pc.part` of parts.json (or of the whole-file parts).
Result<Part> PickPart(const PartsCli& pc, const Plan& plan) {
  std::vector<Part> parts = WholeInputParts(plan);
  if (!pc.parts.empty()) {
    auto text = ReadWholeFile(DefaultFileSystem(), pc.parts);
    if (!text.ok()) return text.status();
    auto parsed = ParsePartsJson(text.value(), pc.parts, &plan);
    if (!parsed.ok()) return parsed.status();
    parts = std::move(parsed).value();
  }
  if (pc.part < 0 || static_cast<size_t>(pc.part) >= parts.size()) {
    return Status::Usage("--part " + std::to_string(pc.part) + ": there are " + std::to_string(parts.size()) +
                         " part(s), numbered from 0" + (pc.parts.empty() ? " (one per input without --parts)" : ""));
  }
  return parts[static_cast<size_t>(pc.part)];
}

int Fail(const CommonOptions& o, const Status& s) {
  std::fprintf(stderr, "prefsift: %s\n", PlanMessage(o, s).c_str());
  return ExitFor(s);
}

int RunObserve(const PartsCli& pc, const std::vector<std::string>& stages) {
  auto plan = BuildPlan(pc.common);
  if (!plan.ok()) return Fail(pc.common, plan.status());
  if (pc.common.out.empty()) return Fail(pc.common, Status::Usage("--out: name the state file to write"));
  auto part = PickPart(pc, plan.value());
  if (!part.ok()) return Fail(pc.common, part.status());
  Status s = ObservePartToFile(plan.value(), stages, part.value(), DefaultFileSystem(), pc.common.out);
  if (!s.ok()) return Fail(pc.common, s);
  if (!pc.common.quiet) std::fprintf(stderr, "wrote %s\n", pc.common.out.c_str());
  return kExitOk;
}

// `decide --store`: the parts' batch added to a growing store, as `add` adds a
// whole batch (docs/store.md, "A batch in parts").
int RunDecideIntoStore(const PartsCli& pc, const Plan& plan) {
#ifndef PREFSIFT_HAVE_STORE
  return Fail(pc.common, Status::Usage("--store: this prefsift was built without growing stores (SQLite)"));
#else
  store::AddOptions o;
  o.store_path = pc.store;
  o.wait_ms = static_cast<int>(pc.wait_s * 1000);
  o.table = !pc.common.quiet;
  auto r = store::AddBatchFromStates(plan, o, pc.states, DefaultFileSystem(), stderr);
  if (!r.ok()) return Fail(pc.common, r.status());
  return ReportAdded(r.value(), plan, pc.common.quiet,
                     "added batch " + std::to_string(r.value().batch) + " to the store " + pc.store + "; wrote " +
                         plan.output + " (apply each part next)");
#endif
}

int RunDecide(const PartsCli& pc, const std::vector<std::string>& stages) {
  auto plan = BuildPlan(pc.common);
  if (!plan.ok()) return Fail(pc.common, plan.status());
  if (!pc.store.empty()) return RunDecideIntoStore(pc, plan.value());
  PipelineOptions opts;
  opts.stages = stages;
  opts.table = !pc.common.quiet;
  opts.timings = pc.common.timings;  // each decide step's wall seconds on stderr
  auto outcome = DecideFromStates(plan.value(), opts, pc.states, DefaultFileSystem(), stderr);
  if (!outcome.ok()) return Fail(pc.common, outcome.status());
  if (!pc.common.quiet) std::fprintf(stderr, "wrote %s\n", plan.value().output.c_str());
  const RunOutcome& oc = outcome.value();
  const int code = ExitForRun({oc.entries, oc.kept, oc.rejected, oc.gate_failed, plan.value().strict});
  if (code == kExitNothingKept) {
    std::fprintf(stderr, "prefsift: every one of the %llu records was rejected (exit %d)\n",
                 static_cast<unsigned long long>(oc.entries), kExitNothingKept);
  }
  if (code == kExitStrict) {
    std::fprintf(stderr, "prefsift: --strict: %llu record(s) rejected\n", static_cast<unsigned long long>(oc.rejected));
  }
  return code;
}

int RunApply(const PartsCli& pc, const std::vector<std::string>& stages) {
  auto plan = BuildPlan(pc.common);
  if (!plan.ok()) return Fail(pc.common, plan.status());
  auto part = PickPart(pc, plan.value());
  if (!part.ok()) return Fail(pc.common, part.status());
  auto outcome = ApplyPart(plan.value(), stages, part.value(), pc.decisions, DefaultFileSystem());
  if (!outcome.ok()) return Fail(pc.common, outcome.status());
  if (!pc.common.quiet) std::fprintf(stderr, "wrote %s\n", plan.value().output.c_str());
  return kExitOk;
}

class Commands : public PartsCommands {
 public:
  explicit Commands(CLI::App* app) {
    observe_cmd_ = app->add_subcommand(
        "observe", "Pass 1 over one part of the inputs: its observed state to a state file (for many machines)");
    decide_cmd_ = app->add_subcommand(
        "decide", "Decide over the state files of all parts: decision files, summary, datasheet, report, gate");
    apply_cmd_ = app->add_subcommand(
        "apply", "Pass 2 over one part with its decision file: the part's split files and rejects.jsonl");
    for (auto [cmd, o] : {std::pair{observe_cmd_, &observe_}, std::pair{decide_cmd_, &decide_},
                          std::pair{apply_cmd_, &apply_}}) {
      AddCommon(cmd, &o->common);
      AddStageOptions(cmd, AllStageNames(), &o->common.stage);
    }
    for (auto [cmd, o] : {std::pair{observe_cmd_, &observe_}, std::pair{apply_cmd_, &apply_}}) {
      cmd->add_option("--parts", o->parts, "parts.json: the parts of the inputs (default: one whole-file part per input)");
      cmd->add_option("--part", o->part, "The part to read, numbered from 0")->required();
    }
    decide_cmd_->add_option("--state", decide_.states, "The parts' state files, in part order (repeatable)")
        ->required();
    decide_cmd_->add_option("--store", decide_.store,
                            "Add the batch to this store (SQLite; created when missing), as `add` does (docs/store.md)");
    decide_cmd_->add_option("--wait", decide_.wait_s,
                            "With --store: seconds to wait while another run writes the store (default 30), then exit 3");
    apply_cmd_->add_option("--decisions", apply_.decisions, "The part's decision file, from decide's output folder")
        ->required();
    observe_cmd_->get_option("--out")->description("The state file to write");
    observe_cmd_->footer(
        "\nExample:\n  prefsift observe --plan plan.json --parts parts.json --part 3 --out state/part-3.state\n");
    decide_cmd_->footer(
        "\nExamples:\n  prefsift decide --plan plan.json --state state/part-0.state state/part-1.state --out decided\n"
        "  prefsift decide --plan plan.json --state state/part-0.state state/part-1.state --store lantern.db --out decided\n");
    apply_cmd_->footer("\nExample:\n  prefsift apply --plan plan.json --parts parts.json --part 3 "
                       "--decisions decided/part-3.decisions --out parts-out/part-3\n");
  }

  int RunIfParsed() override {
    if (observe_cmd_->parsed()) return RunObserve(observe_, AllStageNames());
    if (decide_cmd_->parsed()) return RunDecide(decide_, AllStageNames());
    if (apply_cmd_->parsed()) return RunApply(apply_, AllStageNames());
    return -1;
  }

 private:
  PartsCli observe_, decide_, apply_;
  CLI::App *observe_cmd_, *decide_cmd_, *apply_cmd_;
};

}  // namespace

std::unique_ptr<PartsCommands> AddPartsCommands(CLI::App* app) { return std::make_unique<Commands>(app); }

}  // namespace prefsift
