// Fuzz target: plan-file text -> Plan, the way LoadPlanFile reads it.
// Property: every input gives a Plan or a usage error; nothing throws or
// crashes (nlohmann reports parse errors by exception, which LoadPlanFile
// turns into a value; PlanFromJson must not throw on any parsed value).
#include <nlohmann/json.hpp>

#include <cstdint>
#include <cstdlib>
#include <string>

#include "core/plan.h"
#include "io/memory_file_system.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  std::string text(reinterpret_cast<const char*>(data), size);
  // 1. The in-memory path on parsed JSON (comments allowed, as in plan files).
  nlohmann::ordered_json j = nlohmann::ordered_json::parse(text, nullptr, /*allow_exceptions=*/false,
                                                           /*ignore_comments=*/true);
  if (!j.is_discarded()) {
    auto p = prefsift::PlanFromJson(j, "base", "fuzz");
    if (!p.ok() && p.status().message().empty()) std::abort();
  }
  // 2. The file path, which must turn parse errors into values (the file
  // held in memory: no disk writes).
  static prefsift::MemoryFileSystem fs;
  fs.Put("/fuzz/plan.json", text);
  auto p = prefsift::LoadPlanFile(&fs, "/fuzz/plan.json");
  if (!p.ok() && p.status().message().empty()) std::abort();
  return 0;
}
