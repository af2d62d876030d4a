// Reading the input limits (InputLimits, core/record_reader.h) from a plan's
// "limits" object or the command line, and the ceilings that keep a run safe.
// docs/hardening.md lists every limit with its default.
// Thread-safety: pure functions.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <cstddef>
#include <string>

#include "core/record_reader.h"
#include "core/status.h"

namespace prefsift {

// The largest limits.max_depth accepted: deeper nesting would risk the stack
// of a worker thread in code that walks parsed records recursively.
inline constexpr size_t kMaxDepthCeiling = 1024;

// Nesting deeper than this in a plan file is refused (the plan is echoed into
// summary.json, and writing JSON recurses).
inline constexpr size_t kMaxPlanDepth = 64;

// Reads a "limits" object ({"max_line_bytes": N, ...}) over *lim. Unknown
// keys, values that are not positive integers, max_candidates < 2 and
// max_depth above kMaxDepthCeiling are usage errors naming `where` and the key.
Status LimitsFromJson(const nlohmann::ordered_json& j, const std::string& where, InputLimits* lim);

}  // namespace prefsift
