// Evaluation sets for the leakage check: their description in the plan and
// loading them into memory.
//
// Three formats (docs/leakage.md):
//   "text"        one prompt per line; the item id is the 1-based line number
//                 (blank lines are skipped but still counted);
//   "jsonl"       one JSON object per line; JSON Pointers name the prompt text
//                 ("text"), and optionally a reference answer ("reference")
//                 and an item id ("id"; default: the line number);
//   "preference"  a preference file in any supported layout (core/layout.h);
//                 the prompt is Record::UserPromptText(), the reference answer
//                 is the chosen candidate (when the top is not tied), the item
//                 id is the record id.
// Files may be plain, .gz or .zst (io/line_reader.h). A missing or unreadable
// file, or a line that does not parse, is an input error naming the file (and
// the line).
// Thread-safety: pure functions over their arguments.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <cstdint>
#include <string>
#include <vector>

#include "core/layout.h"
#include "core/record_reader.h"
#include "core/status.h"

namespace prefsift {

class FileSystem;

enum class EvalFormat { kText, kJsonl, kPreference };
const char* EvalFormatName(EvalFormat f);

struct EvalSetSpec {
  std::string name;       // user-given, unique among the sets
  std::string path;       // resolved against the plan's folder
  EvalFormat format = EvalFormat::kText;
  std::string text_pointer, reference_pointer, id_pointer;  // kJsonl ("" = absent)
  Layout layout;          // kPreference
};

struct EvalItem {
  uint32_t set = 0;       // index into EvalCorpus::sets
  std::string id;         // item id within its set
  uint64_t line = 0;      // 1-based line in its file
  std::string text;       // the evaluation prompt, as read (not normalised)
  std::string reference;  // reference answer, "" when none
  // Preference files only: grouping fields of the record ("" when absent).
  std::string thread, annotator, group;
};

struct EvalSetInfo {
  EvalSetSpec spec;
  uint64_t items = 0;
  uint64_t with_reference = 0;
};

struct EvalCorpus {
  std::vector<EvalSetInfo> sets;
  std::vector<EvalItem> items;  // set by set, file order
};

// Parses the plan's "eval_sets" array: [{"name", "path", "format", "text",
// "reference", "id", "layout"}, ...]. "format" may be left out when it is
// implied: "layout" -> preference, "text" -> jsonl, a .txt file -> text.
// Relative paths are resolved against `base_dir`. Errors are usage errors
// naming `where` and the key.
Result<std::vector<EvalSetSpec>> ParseEvalSetSpecs(const nlohmann::ordered_json& list, const std::string& base_dir,
                                                   const std::string& where);

// Reads every set into memory, in the order given.
Result<EvalCorpus> LoadEvalSets(const std::vector<EvalSetSpec>& specs, FileSystem* fs, const InputLimits& limits);

}  // namespace prefsift
