// This build of prefsift and the time of a run, as the summary, the
// datasheet and the store report record them (docs/datasheet.md).
//
// Time: the wall-clock start of the run and its duration; or, in the
// reproducible mode, SOURCE_DATE_EPOCH (seconds since 1970, UTC) as the start
// and no duration, so reruns are byte-identical.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <cstdint>

namespace prefsift {

// When a run started (wall clock, seconds since 1970) and how long it has
// taken so far; negative when unknown (then "now" is the start).
struct RunClock {
  int64_t start_unix_seconds = -1;
  double seconds = -1;
};

// The provenance time, {"utc", "source"[, "duration_seconds"]}: with
// SOURCE_DATE_EPOCH set, that time and no duration (the reproducible mode);
// otherwise the clock's start (or now) and its duration when known.
nlohmann::ordered_json ProvenanceTime(const RunClock& clock = RunClock());

// This build of prefsift: {"name", "version", "revision"}.
nlohmann::ordered_json ToolInfo();

}  // namespace prefsift
