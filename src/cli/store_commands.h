// Subcommands for growing stores (docs/store.md): add, history, store-summary,
// shard-sign, merge. Kept apart from main.cc so the store's options stay in
// one place; main.cc registers and dispatches them with two calls.
#pragma once

#include <memory>

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

}  // namespace prefsift
