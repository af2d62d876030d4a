// `prefsift cut`: the plan's inputs cut into parts for a run on many machines
// (pipeline/cut.h, docs/scale.md). Kept apart from main.cc; main.cc registers
// and dispatches it with two calls.
#pragma once

#include <memory>

namespace CLI {
class App;
}

namespace prefsift {

class CutCommand {
 public:
  virtual ~CutCommand() = default;
  // Returns the exit code when `cut` was parsed, else -1.
  virtual int RunIfParsed() = 0;
};

std::unique_ptr<CutCommand> AddCutCommand(CLI::App* app);

}  // namespace prefsift
