// Cutting the inputs into parts for a run on many machines (docs/scale.md):
// each plain input becomes byte ranges of about equal size that begin at line
// starts; a compressed input (gzip, zstd) is one whole-file part. The parts
// cover every input exactly once, in input order; a part may hold no lines.
// A line belongs to the part in which it starts.
//
// The result is written as parts.json (pipeline/parts.h, docs/parts.md), with
// "end": null for a whole compressed file.
//
// Thread-safety: the functions hold no state; the FileSystem must be usable
// from the calling thread.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "core/plan.h"
#include "core/status.h"
#include "io/file_system.h"
#include "pipeline/parts.h"

namespace prefsift {

// One part: bytes [begin, end) of the (uncompressed) input `input`, whose
// first line is line `first_line` (1-based) of that input. `end` is empty for
// a compressed input, which is always one part from its start to its end.
struct CutPart {
  uint64_t part = 0;
  uint64_t input = 0;
  std::string path;
  uint64_t begin = 0;
  std::optional<uint64_t> end;
  uint64_t first_line = 1;
  uint64_t lines = 0;  // lines that start in the part (a last line without LF counts); not written to parts.json
};

// How finely to cut. Exactly one of the two is non-zero.
struct CutOptions {
  // Parts in total over all inputs. Each compressed input takes one; the rest
  // are shared among the plain inputs in proportion to their size (at least
  // one each, largest remainder first, ties to the earlier input).
  // REQUIRES: at least the number of inputs (else a usage error).
  uint64_t parts = 0;
  // Or: about this many bytes per part; each plain input gets
  // ceil(size / part_bytes) parts (at least one).
  uint64_t part_bytes = 0;
};

// Reads each input once (through `fs`) and cuts it. Errors: an input that
// cannot be read (input error), options that ask for nothing or for fewer
// parts than inputs (usage error).
Result<std::vector<CutPart>> CutInputs(FileSystem* fs, const std::vector<std::string>& paths, const CutOptions& opts);

// The parts as parts.json lists them (without the line counts).
std::vector<Part> ToParts(const std::vector<CutPart>& parts);

// Cuts the plan's inputs and writes parts.json to `out` atomically (a
// temporary name in the same folder, then a rename; the folder is created
// when missing). An existing `out` with the same bytes is left as it is (a
// re-run changes nothing); one with other bytes is replaced only when
// `overwrite` is true (else a usage error). `out` must not be anything the
// plan reads (usage error).
Result<std::vector<CutPart>> CutPlanToFile(FileSystem* fs, const Plan& plan, const CutOptions& opts,
                                           const std::string& out, bool overwrite);

}  // namespace prefsift
