// Fuzz target: rule-pack text -> RuleSet (screen/rules.h ParseRulePack).
// Property: a RuleSet or an error naming the source; never a crash.
#include <cstdint>
#include <cstdlib>
#include <string>
#include <string_view>

#include "screen/rules.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  std::string_view text(reinterpret_cast<const char*>(data), size);
  auto r = prefsift::screen::ParseRulePack(text, "fuzz.json");
  if (!r.ok() && r.status().message().empty()) std::abort();
  return 0;
}
