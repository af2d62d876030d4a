// The one essential setting of each stage command, given on the command line
// instead of a plan (docs/cli.md, "Stage commands without a plan"):
//   leakage --eval FILE[:POINTER] (repeatable)   near --threshold J
//   screen --rules PACK (repeatable)             bias --alpha A
//   split --split NAME=RATIO (repeatable)        dedup --conflicts POLICY
// `run` takes all of them. Each overrides the plan's value. A stage command
// whose stage can do nothing (leakage without evaluation sets, a stage the
// plan disables) is a usage error that says so.
// Thread-safety: none needed (command-line parsing).
#pragma once

#include <string>
#include <vector>

#include "core/plan.h"
#include "core/status.h"

namespace CLI {
class App;
}

namespace prefsift {

struct StageOptions {
  std::vector<std::string> evals;   // FILE or FILE:/pointer
  std::vector<std::string> rules;   // pack names or paths
  std::vector<std::string> splits;  // NAME=RATIO
  std::string conflicts;
  double near_threshold = -1;
  double alpha = -1;
};

// Adds the options that apply to a command running `stages` (all of them for `run`).
void AddStageOptions(CLI::App* cmd, const std::vector<std::string>& stages, StageOptions* o);

// Writes the options into plan.stages (with a plan file, relative paths are
// made absolute: they are relative to the working folder, not to the plan).
Status ApplyStageOptions(const StageOptions& o, Plan* plan);

// For a command that runs one stage alone: a usage error when that stage can
// do nothing with this plan.
Status CheckStageCanWork(const Plan& plan, const std::vector<std::string>& stages, const std::string& command);

}  // namespace prefsift
