// Subcommands for growing stores (docs/store.md): add, history, store-summary,
// shard-sign, merge. Kept apart from main.cc so the store's options stay in
// one place; main.cc registers and dispatches them with two calls.
#pragma once

#include <memory>
#include <string>

#include "core/plan.h"
#include "store/add_batch.h"

namespace CLI {
class App;
}

namespace prefsift {

class StoreCommands {
 public:
  virtual ~StoreCommands() = default;
  // Returns the exit code when one of these subcommands was parsed, else -1.
  virtual int RunIfParsed() = 0;
};

std::unique_ptr<StoreCommands> AddStoreCommands(CLI::App* app);

// The messages and exit code of a batch added to a store (`add`, `decide
// --store`): "already added" (exit 0), a failed gate (the folder is kept for
// review, the store unchanged), else `added` unless quiet, then the run's exit
// code (cli/exit_codes.h ExitForRun) with its message.
int ReportAdded(const store::AddOutcome& oc, const Plan& plan, bool quiet, const std::string& added);

}  // namespace prefsift
