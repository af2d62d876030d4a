// Options shared by the record-reading subcommands; see common_options.h.
#include "cli/common_options.h"

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include <tuple>

#include "core/limits.h"
#include "io/file_system.h"
#include "stages/stage.h"

namespace prefsift {

using Json = nlohmann::ordered_json;

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
  cmd->add_flag("--buffered-output", o->buffered_output,
                "Write the split files and rejects.jsonl through the page cache (default: past it, O_DIRECT, where "
                "the file system allows; same bytes either way)");
  cmd->add_flag("--buffered-input", o->buffered_input,
                "Read input files through the page cache (default: files of 64 MiB or more past it, O_DIRECT, a "
                "block read ahead, where the file system allows; same bytes either way)");
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

std::string PlanMessage(const CommonOptions& o, const Status& s) {
  return s.code() == StatusCode::kUsage ? PlaceInPlanFile(DefaultFileSystem(), o.plan_path, s.message()) : s.message();
}

std::vector<std::string> AllStageNames() {
  std::vector<std::string> names;
  for (const auto& s : AllStages()) names.push_back(s.name);
  return names;
}

}  // namespace prefsift
