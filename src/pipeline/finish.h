// The end of a run, after summary.json is built (the file work of it; the
// report library renders and never touches a file): the gate, provenance
// (SHA-256 of every input and output file, tool version, plan digest, seed,
// time), then the datasheet (datasheet.md, datasheet.json) and the HTML report
// (report.html). docs/gate.md, docs/datasheet.md, docs/report.md.
//
// Time: the wall-clock start of the run and its duration; or, in the
// reproducible mode, SOURCE_DATE_EPOCH (seconds since 1970, UTC) as the start
// and no duration, so reruns are byte-identical (docs/datasheet.md).
// Thread-safety: one run owns these calls.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <cstdint>
#include <optional>
#include <vector>

#include "core/plan.h"
#include "core/status.h"
#include "io/file_system.h"
#include "io/digesting_file_system.h"
#include "io/output_dir.h"
#include "report/tool_info.h"

namespace prefsift {

// Usage errors for the plan's "gate" and "provenance" objects, before any work.
Status ValidateFinishPlan(const Plan& plan);

// Adds "gate" (decided before pass 2: DecideGate in report/gate.h),
// "examples" (`reject_examples`, passes.h RejectExamples, each with the masked
// forms of its record's personal-data findings; one finding per personal-data
// kind) and "provenance" to the summary. Hashes every input file and every
// file already in `out`, except an input with a digest in `input_digests` and
// an output that `written` digested as it was written (the folder's file
// system; io/digesting_file_system.h). REQUIRES: every output file except
// summary.json is written and closed.
Status FinishSummary(const Plan& plan, FileSystem* fs, const OutputDir& out, nlohmann::ordered_json* summary,
                     const nlohmann::ordered_json& gate, nlohmann::ordered_json reject_examples,
                     const RunClock& clock = RunClock(),
                     const std::vector<std::optional<FileDigest>>& input_digests = {},
                     const DigestingFileSystem* written = nullptr);

// Writes datasheet.md, datasheet.json and report.html from the finished
// summary (hashing summary.json, which must be written and closed).
Status WriteDocuments(const Plan& plan, FileSystem* fs, OutputDir& out, const nlohmann::ordered_json& summary);

}  // namespace prefsift
