// `prefsift observe`, `decide` and `apply`: the pipeline over parts of the
// inputs, for many machines (pipeline/part_commands.h, docs/parts.md); with
// `decide --store`, a batch in parts added to a growing store (docs/store.md).
// Kept apart from main.cc; main.cc registers and dispatches them with two calls.
#pragma once

#include <memory>

namespace CLI {
class App;
}

namespace prefsift {

class PartsCommands {
 public:
  virtual ~PartsCommands() = default;
  // Returns the exit code when observe, decide or apply was parsed, else -1.
  virtual int RunIfParsed() = 0;
};

std::unique_ptr<PartsCommands> AddPartsCommands(CLI::App* app);

}  // namespace prefsift
