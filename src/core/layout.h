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
  int choice_base = 0;            // 0 or 1: the number of the first candidate (choice and order)
  int rank_base = 1;              // 0 or 1: the rank of the best candidate (ranks)
  bool base_given = false;        // the layout states choice_base / rank_base (else the data is checked)
  JsonPointer ranking;            // kRanks or kOrder
  JsonPointer annotator, thread, source, timestamp, group, metadata;  // optional
  // Chat roles, compared without regard to ASCII case: the user's turns are the
  // prompt that matching uses; system turns are left out of it.
  std::vector<std::string> user_roles, system_roles;

  bool has_id = false, has_candidate_origin = false;
  bool id_required = false;       // the id pointer was named by the user (a preset's id is optional)
  bool has_annotator = false, has_thread = false, has_source = false, has_timestamp = false, has_group = false,
       has_metadata = false;
};

// The default role words (docs/layouts.md, "Chat prompts").
const std::vector<std::string>& DefaultUserRoles();
const std::vector<std::string>& DefaultSystemRoles();

// Names of the built-in presets, for --help and errors.
std::vector<std::string> LayoutPresetNames();

// Builds a layout from a JSON object: {"preset": "...", "<field>": "<pointer>", ...}.
// Unknown keys, bad pointers, and an incomplete or ambiguous judgment are usage
// errors naming `where` (e.g. "plan.json: inputs[0].layout").
Result<Layout> LayoutFromJson(const nlohmann::ordered_json& spec, const std::string& where);

// The layout as a JSON object (for summary and datasheet provenance).
void LayoutToJson(const Layout& layout, nlohmann::ordered_json* out);

}  // namespace prefsift
