// Common facts of a record (hashes of normalised text, lengths, judgment),
// computed once in pass 1 for every stage to read.
#pragma once

#include "core/normalize.h"
#include "core/record.h"
#include "stages/run_state.h"

namespace prefsift {

// Number of Unicode code points in valid UTF-8.
uint32_t CountCodePoints(std::string_view s);
// Number of whitespace-separated words (ASCII white space and U+3000 are separators).
uint32_t CountWords(std::string_view s);

RecordFacts ComputeFacts(const Record& rec, const NormalizeOptions& norm);

}  // namespace prefsift
