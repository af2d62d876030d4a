// prefsift command line. The only place that knows CLI11 and exit codes.
//
// Exit codes: cli/exit_codes.h and docs/cli.md.
#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include <unistd.h>

#include <algorithm>
#include <cstdio>
#include <iostream>

#include "cli/common_options.h"
#include "cli/cut_command.h"
#include "cli/parts_commands.h"
#include "cli/exit_codes.h"
#include "cli/stage_options.h"
#include "core/plan.h"
#include "io/file_system.h"
#include "io/signal_cleanup.h"
#include "prefsift_version.h"
#include "pipeline/pipeline.h"
#include "audit/split_audit.h"
#include "stages/stage.h"
#ifdef PREFSIFT_HAVE_STORE
#include "cli/store_commands.h"  // growing stores (docs/store.md)
#endif

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

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
  auto outcome =
      RunPipeline(plan.value(), opts, PosixFileSystemWith(!o.buffered_output, !o.buffered_input), stderr);
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
  auto parts_commands = AddPartsCommands(&app);  // observe, decide, apply (docs/parts.md)
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
  if (int rc = parts_commands->RunIfParsed(); rc >= 0) return rc;
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
