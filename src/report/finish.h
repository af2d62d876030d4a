// The end of a run, after summary.json is built: the gate, provenance
// (SHA-256 of every input and output file, tool version, plan digest, seed,
// time), then the datasheet (datasheet.md, datasheet.json) and the HTML report
// (report.html). docs/gate.md, docs/datasheet.md, docs/report.md.
//
// Time: SOURCE_DATE_EPOCH (seconds since 1970, UTC) when set, so reruns are
// byte-identical; when unset no time is recorded (the outputs stay identical).
// Thread-safety: one run owns these calls.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include "core/plan.h"
#include "core/status.h"
#include "io/file_system.h"
#include "io/output_dir.h"

namespace prefsift {

// Usage errors for the plan's "gate" and "provenance" objects, before any work.
Status ValidateFinishPlan(const Plan& plan);

// Adds "gate" and "provenance" to the summary; *gate_failed is set when a gate
// check fails. Hashes every input file and every file already in `out`.
// REQUIRES: every output file except summary.json is written and closed.
// `command_stages`: the stages the command runs (gate checks of others are skipped).
Status FinishSummary(const Plan& plan, FileSystem* fs, const OutputDir& out, nlohmann::ordered_json* summary,
                     bool* gate_failed, const std::vector<std::string>& command_stages);

// The provenance time: SOURCE_DATE_EPOCH as UTC text when set, otherwise
// "time not recorded" (so outputs stay byte-identical). {"utc", "source"}.
nlohmann::ordered_json ProvenanceTime();

// This build of prefsift: {"name", "version", "revision"}.
nlohmann::ordered_json ToolInfo();

// Writes datasheet.md, datasheet.json and report.html from the finished
// summary (hashing summary.json, which must be written and closed).
Status WriteDocuments(const Plan& plan, FileSystem* fs, OutputDir& out, const nlohmann::ordered_json& summary);

}  // namespace prefsift
