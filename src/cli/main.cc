// prefsift command line. The only place that knows CLI11 and exit codes.
//
// Exit codes: cli/exit_codes.h and docs/cli.md.
#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include <unistd.h>

#include <algorithm>
#include <cstdio>
#include <iostream>
#include <tuple>

#include "cli/cut_command.h"
#include "cli/exit_codes.h"
#include "cli/stage_options.h"
#include "core/limits.h"
#include "core/plan.h"
#include "io/file_system.h"
#include "io/signal_cleanup.h"
#include "prefsift_version.h"
#include "pipeline/observed_state.h"
#include "pipeline/part_commands.h"
#include "pipeline/parts.h"
#include "pipeline/pipeline.h"
#include "audit/split_audit.h"
#ifdef PREFSIFT_HAVE_STORE
#include "store/add_batch.h"
#endif
#include "stages/stage.h"
#ifdef PREFSIFT_HAVE_STORE
#include "cli/store_commands.h"  // growing stores (docs/store.md)
#endif

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;


// Options every record-reading subcommand shares.
struct CommonOptions {
  std::vector<std::string> inputs;
  std::string plan_path;
  std::string layout = "";
  std::vector<std::string> fields;
  std::string out;
  bool overwrite = false;
  bool strict = false;
  unsigned threads = 0;
  bool quiet = false;
  bool timings = false;
  bool progress = false;
  double progress_seconds = 5;
  long long seed = -1;
  StageOptions stage;  // the stages' essential settings (cli/stage_options.h)
  // Input limits (docs/hardening.md); 0 = the plan's value or the default.
  size_t max_line_bytes = 0, max_depth = 0, max_candidates = 0, max_text_bytes = 0;
  double max_reject_share = 0;
};

void AddCommon(CLI::App* cmd, CommonOptions* o) {
  cmd->add_option("inputs", o->inputs, "Input JSONL files (plain, .gz or .zst); or give them in --plan");
  cmd->add_option("-p,--plan", o->plan_path, "Plan file (JSON, comments allowed): inputs, layouts, stage settings");
  cmd->add_option("--layout", o->layout, "Layout preset for inputs named on the command line (see `prefsift layouts`)");
  cmd->add_option("--field", o->fields,
                  "Map one field with a JSON Pointer, KEY=POINTER, e.g. --field prompt=/question "
                  "--field candidates=/answers --field ranks=/ranking (repeatable)");
  cmd->add_option("-o,--out", o->out, "Output folder (must not exist unless --overwrite)");
  cmd->add_flag("--overwrite", o->overwrite, "Replace an existing output folder (atomically, at the end)");
  cmd->add_flag("--strict", o->strict, "Exit with code 5 if any record is rejected");
  cmd->add_option("--threads", o->threads, "Worker threads (default: all cores); results do not depend on it");
  cmd->add_option("--seed", o->seed, "Seed for every random choice (default 0, or the plan's)");
  cmd->add_flag("-q,--quiet", o->quiet, "No ledger table or progress on stderr");
  cmd->add_flag("--timings", o->timings, "Print the wall time of each phase and stage on stderr (not in any output file)");
  cmd->add_flag("--progress", o->progress,
                "When stderr is not a terminal (logs, CI), print a progress line every 5 seconds (on a terminal "
                "the line is always shown)");
  cmd->add_option("--progress-seconds", o->progress_seconds, "Seconds between those lines (default 5)")
      ->check(CLI::NonNegativeNumber);
  // Input limits override the plan's limits.* (a record over one is rejected with its reason).
  CLI::Option_group* lim = cmd->add_option_group("Limits", "Input limits (plan: limits.*); over a limit = reject");
  lim->add_option("--max-line-bytes", o->max_line_bytes, "Longest input line in bytes (default 64 MiB)");
  lim->add_option("--max-depth", o->max_depth, "Deepest JSON nesting (default 128, at most 1024)");
  lim->add_option("--max-candidates", o->max_candidates, "Most candidates per record (default 256)");
  lim->add_option("--max-text-bytes", o->max_text_bytes, "Longest prompt, turn or candidate text in bytes (default 4 MiB)");
  lim->add_option("--max-reject-share", o->max_reject_share,
                  "Stop (exit 8) when one ingest reason rejects more than this share of a file (default 0.5; 1 = never)");
}

Result<Plan> BuildPlan(const CommonOptions& o) {
  Plan plan;
  if (!o.plan_path.empty()) {
    auto loaded = LoadPlanFile(DefaultFileSystem(), o.plan_path);
    if (!loaded.ok()) return loaded.status();
    plan = std::move(loaded).value();
  }
  if (!o.inputs.empty()) {
    Json spec = Json::object();
    if (!o.layout.empty()) spec["preset"] = o.layout;
    for (const auto& f : o.fields) {
      auto eq = f.find('=');
      if (eq == std::string::npos || eq == 0) {
        return Status::Usage("--field " + f + ": expected KEY=POINTER, e.g. prompt=/question");
      }
      std::string key = f.substr(0, eq), value = f.substr(eq + 1);
      if (key == "choice_base" || key == "rank_base") {
        if (value != "0" && value != "1") return Status::Usage("--field " + key + "=" + value + ": must be 0 or 1");
        spec[key] = std::stoi(value);
      } else if (key == "user_roles" || key == "system_roles") {
        Json roles = Json::array();  // comma-separated on the command line
        size_t start = 0;
        while (start <= value.size()) {
          size_t comma = value.find(',', start);
          if (comma == std::string::npos) comma = value.size();
          if (comma > start) roles.push_back(value.substr(start, comma - start));
          start = comma + 1;
        }
        spec[key] = roles;
      } else {
        spec[key] = value;
      }
    }
    if (spec.empty()) {
      return Status::Usage("inputs on the command line need a layout: --layout PRESET and/or --field KEY=POINTER");
    }
    for (size_t i = 0; i < o.inputs.size(); ++i) {
      Status s = AddInput(&plan, o.inputs[i], spec, "command line");
      if (!s.ok()) return s;
    }
  } else if (!o.layout.empty() || !o.fields.empty()) {
    return Status::Usage("--layout and --field apply to inputs named on the command line; none were given");
  }
  if (Status s = ApplyStageOptions(o.stage, &plan); !s.ok()) return s;
  if (!o.out.empty()) plan.output = o.out;
  if (o.overwrite) plan.overwrite = true;
  if (o.strict) plan.strict = true;
  if (o.threads) plan.threads = o.threads;
  if (o.seed >= 0) plan.seed = static_cast<uint64_t>(o.seed);
  for (auto [flag, key, v] : {std::tuple{"--max-line-bytes", "max_line_bytes", o.max_line_bytes},
                              std::tuple{"--max-depth", "max_depth", o.max_depth},
                              std::tuple{"--max-candidates", "max_candidates", o.max_candidates},
                              std::tuple{"--max-text-bytes", "max_text_bytes", o.max_text_bytes}}) {
    if (v == 0) continue;
    Status s = LimitsFromJson(Json{{key, v}}, "limits", &plan.limits);
    if (!s.ok()) return Status::Usage(std::string(flag) + ": " + s.message());
  }
  if (o.max_reject_share != 0) {
    Status s = LimitsFromJson(Json{{"max_reject_share", o.max_reject_share}}, "limits", &plan.limits);
    if (!s.ok()) return Status::Usage(std::string("--max-reject-share: ") + s.message());
  }
  return plan;
}

// A usage error about a plan setting, with its place in the plan file.
std::string PlanMessage(const CommonOptions& o, const Status& s) {
  return s.code() == StatusCode::kUsage ? PlaceInPlanFile(DefaultFileSystem(), o.plan_path, s.message()) : s.message();
}

int RunWith(const CommonOptions& o, const std::vector<std::string>& stages, const std::string& command) {
  auto plan = BuildPlan(o);
  Status can = plan.ok() ? CheckStageCanWork(plan.value(), stages, command) : plan.status();
  if (!can.ok()) {
    std::fprintf(stderr, "prefsift: %s\n", can.message().c_str());
    return ExitFor(can);
  }
  PipelineOptions opts;
  opts.stages = stages;
  opts.progress = !o.quiet && ::isatty(2);
  opts.progress_lines = !o.quiet && o.progress;
  opts.progress_seconds = o.progress_seconds;
  opts.table = !o.quiet;
  opts.timings = o.timings;
  auto outcome = RunPipeline(plan.value(), opts, DefaultFileSystem(), stderr);
  if (!outcome.ok()) {
    std::fprintf(stderr, "prefsift: %s\n", PlanMessage(o, outcome.status()).c_str());
    return ExitFor(outcome.status());
  }
  if (!o.quiet) std::fprintf(stderr, "wrote %s\n", plan.value().output.c_str());
  const RunOutcome& oc = outcome.value();
  const int code = ExitForRun({oc.entries, oc.kept, oc.rejected, oc.gate_failed, plan.value().strict});
  if (code == kExitNothingKept) {
    std::fprintf(stderr,
                 "prefsift: every one of the %llu records was rejected, so nothing is left to train on; rejects.jsonl "
                 "in %s says why (exit %d)\n",
                 static_cast<unsigned long long>(oc.entries), plan.value().output.c_str(), kExitNothingKept);
  } else if (code == kExitStrict) {
    std::fprintf(stderr, "prefsift: --strict: %llu record(s) rejected\n", static_cast<unsigned long long>(oc.rejected));
  }
  return code;
}

// `prefsift observe`, `decide` and `apply`: the pipeline over parts of the
// inputs, for many machines (docs/parts.md).
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
  const store::AddOutcome& oc = r.value();
  if (oc.already_added) {
    std::fprintf(stderr, "prefsift: these inputs with this plan were already added as batch %lld; nothing to do\n",
                 static_cast<long long>(oc.batch));
    return kExitOk;
  }
  const int code = ExitForRun({oc.entries, oc.kept, oc.rejected, oc.gate_failed, plan.strict});
  if (oc.gate_failed) {
    std::fprintf(stderr, "prefsift: the gate failed: %s holds the batch's decisions for review; the store is unchanged\n",
                 plan.output.c_str());
  } else if (!pc.common.quiet) {
    std::fprintf(stderr, "added batch %lld to the store %s; wrote %s (apply each part next)\n",
                 static_cast<long long>(oc.batch), pc.store.c_str(), plan.output.c_str());
  }
  if (code == kExitNothingKept) std::fprintf(stderr, "prefsift: every record of the batch was rejected (exit %d)\n", code);
  if (code == kExitStrict) {
    std::fprintf(stderr, "prefsift: --strict: %llu record(s) rejected\n", static_cast<unsigned long long>(oc.rejected));
  }
  return code;
#endif
}

int RunDecide(const PartsCli& pc, const std::vector<std::string>& stages) {
  auto plan = BuildPlan(pc.common);
  if (!plan.ok()) return Fail(pc.common, plan.status());
  if (!pc.store.empty()) return RunDecideIntoStore(pc, plan.value());
  PipelineOptions opts;
  opts.stages = stages;
  opts.table = !pc.common.quiet;
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

// `prefsift audit`: train/held-out leakage check of existing files (docs/leakage.md).
struct AuditCli {
  CommonOptions common;
  std::string train;
  std::vector<std::string> heldout;
  bool by_annotator = false, gate = false;
};

int RunAudit(AuditCli a) {
  bool flags = !a.common.layout.empty() || !a.common.fields.empty();
  if (flags) {
    a.common.inputs = {a.train};
    a.common.inputs.insert(a.common.inputs.end(), a.heldout.begin(), a.heldout.end());
  }
  auto plan = BuildPlan(a.common);
  auto opts = plan.ok() ? AuditOptionsFromPlan(plan.value(), a.train, a.heldout, flags) : Result<AuditOptions>(plan.status());
  if (opts.ok()) opts.value().by_annotator = a.by_annotator;
  auto outcome = opts.ok() ? RunSplitAudit(opts.value(), DefaultFileSystem()) : Result<AuditOutcome>(opts.status());
  if (!outcome.ok()) {
    std::fprintf(stderr, "prefsift: %s\n", outcome.status().message().c_str());
    return ExitFor(outcome.status());
  }
  if (!a.common.quiet) std::fprintf(stderr, "%swrote %s\n", outcome.value().table.c_str(), opts.value().out.c_str());
  return a.gate && outcome.value().leak_found ? kExitGate : kExitOk;
}

// Levenshtein distance (insertions, deletions, substitutions; Levenshtein 1966).
size_t EditDistance(const std::string& a, const std::string& b) {
  std::vector<size_t> row(b.size() + 1);
  for (size_t j = 0; j <= b.size(); ++j) row[j] = j;
  for (size_t i = 1; i <= a.size(); ++i) {
    size_t diag = row[0];
    row[0] = i;
    for (size_t j = 1; j <= b.size(); ++j) {
      size_t up = row[j];
      row[j] = std::min({row[j] + 1, row[j - 1] + 1, diag + (a[i - 1] == b[j - 1] ? 0 : 1)});
      diag = up;
    }
  }
  return row[b.size()];
}

// " (did you mean \"run\"?)" for the nearest name within a third of the
// typed length (at least 2 edits), or a prefix match; else "".
std::string SuggestionFor(const std::string& typed, const std::vector<std::string>& names) {
  std::string best;
  size_t best_d = std::max<size_t>(2, typed.size() / 3) + 1;
  for (const auto& n : names) {
    size_t d = EditDistance(typed, n);
    if (n.rfind(typed, 0) == 0 && typed.size() >= 2) d = std::min<size_t>(d, 1);
    if (d < best_d) {
      best_d = d;
      best = n;
    }
  }
  return best.empty() ? "" : " (did you mean \"" + best + "\"?)";
}

std::vector<std::string> AllStageNames() {
  std::vector<std::string> names;
  for (const auto& s : AllStages()) names.push_back(s.name);
  return names;
}

}  // namespace

int Main(int argc, char** argv);

}  // namespace prefsift

int main(int argc, char** argv) {
  // Library code returns errors as values; this is the last line of defence, so
  // that an unexpected exception still unwinds (removing any partial output
  // folder) and ends with exit 1 and a message instead of an abort.
  try {
    return prefsift::Main(argc, argv);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "prefsift: internal error: %s (please report this with the input that caused it)\n", e.what());
  } catch (...) {
    std::fprintf(stderr, "prefsift: internal error: an unknown exception (please report this)\n");
  }
  return 1;
}

int prefsift::Main(int argc, char** argv) {
  using namespace prefsift;  // NOLINT: main only
  RemovePartialOutputsOnSignal();  // before any thread starts
  CLI::App app{
      "prefsift: gate a human-preference dataset before reward-model training.\n"
      "Every input record ends in exactly one output: a kept file or rejects.jsonl, with a reason.\n"
      "Exit codes: 0 ok, 1 internal/output error, 2 usage error, 3 input error, 4 gate failed, 5 --strict rejects."};
  app.set_version_flag("--version", std::string("prefsift ") + PREFSIFT_VERSION + " (" + PREFSIFT_REVISION + ")");
  app.require_subcommand(1);

  // One table of record-reading subcommands: name, help, stages it runs, an example.
  struct Command {
    const char* name;
    const char* help;
    std::vector<std::string> stages;
    const char* example;
  };
  std::vector<Command> commands = {
      {"run", "Run the whole pipeline, usually from a plan file (--plan)", AllStageNames(),
       "prefsift run --plan samples/demo-plan.json --out demo-out\n"
       "  prefsift run prefs.jsonl --layout pairwise --eval heldout.txt --out out --progress"},
      {"check", "Read and validate the inputs only: malformed records to rejects.jsonl", {},
       "prefsift check data.jsonl --field prompt=/question --field candidates=/answers --field choice=/picked -o out"},
      {"annotators", "Annotator agreement, candidates for review, preference cycles and rushed judgments only",
       {"annotators"}, "prefsift annotators prefs.jsonl --layout choice --field annotator=/rater -o out"},
      {"dedup", "Exact duplicates, label conflicts and degenerate comparisons only", {"exact"},
       "prefsift dedup prefs.jsonl --layout pairwise --conflicts drop-all -o out"},
      {"near", "Near-duplicate prompts (MinHash + LSH clusters) and near-identical candidates only", {"near"},
       "prefsift near prefs.jsonl --layout pairwise --threshold 0.7 -o out"},
      {"leakage", "Train/evaluation leakage against evaluation sets (--eval or the plan's) only", {"leakage"},
       "prefsift leakage prefs.jsonl --layout pairwise --eval heldout.txt --eval staff.jsonl:/question -o out"},
      {"screen", "Personal-data screen only: find, mask, pseudonymise or drop (rule packs in rules/)", {"screen"},
       "prefsift screen prefs.jsonl --layout pairwise --rules contact --rules payment -o out"},
      {"bias", "Position and length bias statistics, optional rebalancing, shortcut audit only", {"bias"},
       "prefsift bias prefs.jsonl --layout choice --alpha 0.01 -o out"},
      {"split", "Group-aware stable splits only (records tied by prompt, near-duplicate cluster, thread)", {"split"},
       "prefsift split prefs.jsonl --layout pairwise --split train=0.9 --split test=0.1 -o out"},
  };
  std::vector<CommonOptions> options(commands.size());
  std::vector<CLI::App*> subs;
  for (size_t i = 0; i < commands.size(); ++i) {
    CLI::App* sub = app.add_subcommand(commands[i].name, commands[i].help);
    AddCommon(sub, &options[i]);
    AddStageOptions(sub, commands[i].stages, &options[i].stage);
    sub->footer(std::string("\nExample:\n  ") + commands[i].example + "\n");
    subs.push_back(sub);
  }
  AuditCli audit;
  CLI::App* audit_cmd = app.add_subcommand(
      "audit", "Check existing train / held-out files for leakage across the split (twins and shared groups)");
  AddCommon(audit_cmd, &audit.common);
  audit_cmd->remove_option(audit_cmd->get_option("inputs"));
  audit_cmd->remove_option(audit_cmd->get_option("--strict"));
  audit_cmd->remove_option(audit_cmd->get_option("--seed"));
  audit_cmd->add_option("--train", audit.train, "The training file")->required();
  audit_cmd->add_option("--heldout", audit.heldout, "A held-out (validation or test) file (repeatable)")->required();
  audit_cmd->add_flag("--by-annotator", audit.by_annotator, "Also report annotators who appear on both sides");
  audit_cmd->add_flag("--gate", audit.gate, "Exit with code 4 if any leakage is found");
  audit_cmd->footer("\nExample:\n  prefsift audit --train train.jsonl --heldout test.jsonl --layout pairwise -o audit-out\n");
  // The pipeline over parts (docs/parts.md): observe, decide, apply.
  PartsCli observe_o, decide_o, apply_o;
  CLI::App* observe_cmd = app.add_subcommand(
      "observe", "Pass 1 over one part of the inputs: its observed state to a state file (for many machines)");
  CLI::App* decide_cmd = app.add_subcommand(
      "decide", "Decide over the state files of all parts: decision files, summary, datasheet, report, gate");
  CLI::App* apply_cmd = app.add_subcommand(
      "apply", "Pass 2 over one part with its decision file: the part's split files and rejects.jsonl");
  for (auto [cmd, o] : {std::pair{observe_cmd, &observe_o}, std::pair{decide_cmd, &decide_o},
                        std::pair{apply_cmd, &apply_o}}) {
    AddCommon(cmd, &o->common);
    AddStageOptions(cmd, AllStageNames(), &o->common.stage);
  }
  for (auto [cmd, o] : {std::pair{observe_cmd, &observe_o}, std::pair{apply_cmd, &apply_o}}) {
    cmd->add_option("--parts", o->parts, "parts.json: the parts of the inputs (default: one whole-file part per input)");
    cmd->add_option("--part", o->part, "The part to read, numbered from 0")->required();
  }
  decide_cmd->add_option("--state", decide_o.states, "The parts' state files, in part order (repeatable)")
      ->required();
  decide_cmd->add_option("--store", decide_o.store,
                         "Add the batch to this store (SQLite; created when missing), as `add` does (docs/store.md)");
  decide_cmd->add_option("--wait", decide_o.wait_s,
                         "With --store: seconds to wait while another run writes the store (default 30), then exit 3");
  apply_cmd->add_option("--decisions", apply_o.decisions, "The part's decision file, from decide's output folder")
      ->required();
  observe_cmd->get_option("--out")->description("The state file to write");
  observe_cmd->footer(
      "\nExample:\n  prefsift observe --plan plan.json --parts parts.json --part 3 --out state/part-3.state\n");
  decide_cmd->footer(
      "\nExamples:\n  prefsift decide --plan plan.json --state state/part-0.state state/part-1.state --out decided\n"
      "  prefsift decide --plan plan.json --state state/part-0.state state/part-1.state --store lantern.db --out decided\n");
  apply_cmd->footer("\nExample:\n  prefsift apply --plan plan.json --parts parts.json --part 3 "
                    "--decisions decided/part-3.decisions --out parts-out/part-3\n");
  CLI::App* layouts = app.add_subcommand("layouts", "List the built-in layout presets and their JSON Pointers");
  layouts->footer("\nExample:\n  prefsift layouts\n");
#ifdef PREFSIFT_HAVE_STORE
  auto store_commands = AddStoreCommands(&app);
#endif
  auto cut_command = AddCutCommand(&app);  // parts for many machines (docs/scale.md)

  app.footer("\nExample:\n  prefsift run --plan samples/demo-plan.json --out demo-out\n"
             "Each command's --help has an example of its own (prefsift dedup --help).\n");
  // An unknown command is named, with the nearest one (CLI11 would only say
  // that a subcommand is required).
  std::vector<std::string> names;
  for (const CLI::App* sub : app.get_subcommands({})) names.push_back(sub->get_name());
  if (argc > 1 && argv[1][0] != '-' && std::find(names.begin(), names.end(), argv[1]) == names.end()) {
    std::fprintf(stderr, "prefsift: unknown command \"%s\"%s; see prefsift --help\n", argv[1],
                 SuggestionFor(argv[1], names).c_str());
    return 2;
  }
  try {
    app.parse(argc, argv);
  } catch (const CLI::CallForHelp& e) {
    return app.exit(e);
  } catch (const CLI::CallForAllHelp& e) {
    return app.exit(e);
  } catch (const CLI::Success& e) {
    return app.exit(e);
  } catch (const CLI::ParseError& e) {
    app.exit(e);
    return 2;
  }
  if (audit_cmd->parsed()) return RunAudit(audit);
  if (observe_cmd->parsed()) return RunObserve(observe_o, AllStageNames());
  if (decide_cmd->parsed()) return RunDecide(decide_o, AllStageNames());
  if (apply_cmd->parsed()) return RunApply(apply_o, AllStageNames());
  if (layouts->parsed()) {
    for (const auto& name : LayoutPresetNames()) {
      auto l = LayoutFromJson(nlohmann::ordered_json{{"preset", name}}, "preset");
      nlohmann::ordered_json j;
      LayoutToJson(l.value(), &j);
      std::printf("%-10s %s\n", name.c_str(), j.dump().c_str());
    }
    return 0;
  }
#ifdef PREFSIFT_HAVE_STORE
  if (int rc = store_commands->RunIfParsed(); rc >= 0) return rc;
#endif
  if (int rc = cut_command->RunIfParsed(); rc >= 0) return rc;
  for (size_t i = 0; i < commands.size(); ++i) {
    if (subs[i]->parsed()) return RunWith(options[i], commands[i].stages, commands[i].name);
  }
  return 2;
}
