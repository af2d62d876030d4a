// Layout: how a user's JSON record maps onto prefsift's preference record.
//
// Every field is an RFC 6901 JSON Pointer into one JSONL line. Presets cover
// the common shapes; a plan file or the command line can override any field.
// See docs/layouts.md for the full list of keys.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <string>
#include <vector>

#include "core/json_pointer.h"
#include "core/status.h"

namespace prefsift {

enum class JudgmentShape {
  kChoice,    // index of the picked candidate (B-way choice)
  kRanks,     // array: rank of each candidate, 1 = best, ties allowed
  kOrder,     // array: candidate indices from best to worst (no ties)
  kPairwise,  // two named fields: the chosen text and the rejected text
};

const char* JudgmentShapeName(JudgmentShape s);

struct Layout {
  std::string preset;             // the preset it started from, or "custom"
  JsonPointer id;                 // optional; default id is "<input name>:<line>"
  JsonPointer prompt;             // a string, or an array of chat turns
  JsonPointer turn_role;          // within a turn object (default /role)
  JsonPointer turn_text;          // within a turn object (default /content)
  JsonPointer candidates;         // array of candidates (not pairwise)
  JsonPointer candidate_text;     // within a candidate element; empty = the element is the text
  JsonPointer candidate_origin;   // within a candidate element (optional)
  JsonPointer chosen;             // pairwise: the chosen text
  JsonPointer rejected;           // pairwise: the rejected text
  JudgmentShape judgment = JudgmentShape::kChoice;
  JsonPointer choice;             // kChoice
  int choice_base = 0;            // 0 or 1
  JsonPointer ranking;            // kRanks or kOrder
  JsonPointer annotator, thread, source, timestamp, group, metadata;  // optional

  bool has_id = false, has_candidate_origin = false;
  bool has_annotator = false, has_thread = false, has_source = false, has_timestamp = false, has_group = false,
       has_metadata = false;
};

// Names of the built-in presets, for --help and errors.
std::vector<std::string> LayoutPresetNames();

// Builds a layout from a JSON object: {"preset": "...", "<field>": "<pointer>", ...}.
// Unknown keys, bad pointers, and an incomplete or ambiguous judgment are usage
// errors naming `where` (e.g. "plan.json: inputs[0].layout").
Result<Layout> LayoutFromJson(const nlohmann::ordered_json& spec, const std::string& where);

// The layout as a JSON object (for summary and datasheet provenance).
void LayoutToJson(const Layout& layout, nlohmann::ordered_json* out);

}  // namespace prefsift
