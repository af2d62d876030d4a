// Parts of a run's inputs (docs/parts.md): a part is a byte range of one uncompressed input, cut at line starts, or a
// whole file. `prefsift observe` reads one part; parts.json lists them all:
//
//   {"format":"prefsift-parts","version":1,"parts":[
//     {"part":0,"input":0,"path":"data.jsonl","begin":0,"end":12345,"first_line":1}, ...]}
//
// Offsets are bytes of the uncompressed file; `begin` is at a line start and
// `end` is exclusive (a line belongs to the part where it starts); `end` is
// null for "to the end of the file", and a compressed input is one such part.
// Parts are numbered from 0, cover each input exactly once in input order, and
// may hold no lines; line numbers in a part continue from `first_line`.
//
// Thread-safety: pure functions.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "core/status.h"

namespace prefsift {

struct Plan;

struct Part {
  uint32_t part = 0;
  uint32_t input = 0;
  std::string path;               // as in the plan
  uint64_t begin = 0;
  std::optional<uint64_t> end;    // exclusive; none = to the end of the file
  uint64_t first_line = 1;
};

// parts.json as text (ends in a newline).
std::string PartsJson(const std::vector<Part>& parts);

// Reads parts.json text; `where` (the file's path) is named in errors. Checks
// the format, numbering and that each input's parts follow each other (begin
// of one = end of the one before); with a plan, also that every input of the
// plan has parts, in its order, with its path.
Result<std::vector<Part>> ParsePartsJson(const std::string& text, const std::string& where, const Plan* plan);

// One whole-file part per input of the plan.
std::vector<Part> WholeInputParts(const Plan& plan);

}  // namespace prefsift
