// Timestamps of judgments as seconds, for the annotators stage's speed check
// (docs/annotators.md). Accepted: a number of seconds (integer or decimal, e.g.
// Unix time), or ISO 8601 / RFC 3339 date-times "YYYY-MM-DDTHH:MM[:SS[.frac]]"
// with an optional "Z" or "+HH:MM"/"-HH:MM" offset (a space may stand for the
// "T"; no offset means the times are compared as given).
// Pure functions, thread-safe.
#pragma once

#include <optional>
#include <string_view>

namespace prefsift {

// Seconds since 1970-01-01T00:00:00Z, or nullopt when `text` is not one of the
// accepted forms (or names an impossible date).
std::optional<double> ParseJudgmentTime(std::string_view text);

}  // namespace prefsift
