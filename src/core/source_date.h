// The reproducible mode's clock: SOURCE_DATE_EPOCH (seconds since 1970-01-01
// UTC, the convention of reproducible builds). Outputs that record a time
// (summary.json and datasheet provenance, a store batch's "added_at") use it
// when it is set, so reruns are byte-identical.
//
// What counts as set: the variable is present, not empty, and the whole value
// is a whole number of seconds of at least 0, as strtoll reads it (leading
// white space and a '+' are allowed; no other characters, no fraction). Any
// other value ("", "abc", "12s", "-5", "1.5") counts as unset: the wall clock
// is used, and a run records its duration.
// Thread-safety: reads the environment; do not call while it is changed.
#pragma once

#include <cstdint>
#include <optional>
#include <string>

namespace prefsift {

// SOURCE_DATE_EPOCH when set (see above), else nothing.
std::optional<int64_t> SourceDateEpoch();

// SourceDateEpoch() when set, else the wall clock now (seconds since 1970).
int64_t NowOrSourceDate();

// "YYYY-MM-DDTHH:MM:SSZ" (UTC) of seconds since 1970.
std::string UtcText(int64_t unix_seconds);

}  // namespace prefsift
