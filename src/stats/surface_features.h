// Surface features of one candidate answer's text, the inputs of the length
// and style bias checks. The slot (position index) is added by the caller.
//
// Pure function, thread-safe. Exact definitions: docs/statistics.md.
#pragma once

#include <cstdint>
#include <span>
#include <string_view>

namespace prefsift::stats {

struct SurfaceFeatures {
  uint64_t words = 0;        // tokens separated by ASCII whitespace (space, \t, \n, \v, \f, \r)
  uint64_t code_points = 0;  // UTF-8 code points (bytes that are not continuation bytes)
  uint64_t list_items = 0;   // lines whose first non-blank text is "-", "*", "+" or "<digits>." / "<digits>)"
                             // followed by a space or tab
  bool has_code_block = false;  // a fence line (``` or ~~~) or an indented block (4 spaces / tab
                                // after a blank line, not continuing a list)
  bool has_heading = false;     // a line of 1-6 '#' (after at most 3 spaces) then space, tab or end
  bool has_refusal = false;     // one of the English refusal/apology phrases (ASCII case-insensitive)
  bool has_url = false;         // "http://", "https://" (case-insensitive) or "www." at a word start
};

// Computes the features. Lines end at "\n" (a trailing "\r" is ignored).
// Invalid UTF-8 is not an error: every non-continuation byte counts as one
// code point.
// One pass of 64-byte blocks (SSE2 masks on x86-64).
SurfaceFeatures ComputeSurfaceFeatures(std::string_view text);

// The same features by plain byte loops: the reference for the differential
// test (tests/stats/surface_features_test.cc). Same results, slower.
SurfaceFeatures ComputeSurfaceFeaturesReference(std::string_view text);

// The refusal/apology phrases, lower case, English only (documented list).
// Curly apostrophes (U+2019) in the text are matched as "'".
std::span<const char* const> RefusalPhrases();

}  // namespace prefsift::stats
