// The options every record-reading subcommand shares (inputs, plan, layout,
// output, limits, the stages' essential settings), and the plan they build.
// Thread-safety: none needed (command-line parsing).
#pragma once

#include <string>
#include <vector>

#include "cli/stage_options.h"
#include "core/plan.h"
#include "core/status.h"

namespace CLI {
class App;
}

namespace prefsift {

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
  bool buffered_output = false;  // split files and rejects.jsonl through the page cache
  bool buffered_input = false;   // the inputs through the page cache
  bool progress = false;
  double progress_seconds = 5;
  long long seed = -1;
  StageOptions stage;  // the stages' essential settings (cli/stage_options.h)
  // Input limits (docs/hardening.md); 0 = the plan's value or the default.
  size_t max_line_bytes = 0, max_depth = 0, max_candidates = 0, max_text_bytes = 0;
  double max_reject_share = 0;
};

// Adds the shared options to a subcommand.
void AddCommon(CLI::App* cmd, CommonOptions* o);

// The plan: the plan file (if any), inputs named on the command line with
// their layout, and every option over the plan's values.
Result<Plan> BuildPlan(const CommonOptions& o);

// A usage error about a plan setting, with its place in the plan file.
std::string PlanMessage(const CommonOptions& o, const Status& s);

// Every stage's name, in pipeline order.
std::vector<std::string> AllStageNames();

}  // namespace prefsift
