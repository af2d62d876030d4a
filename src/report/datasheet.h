// The datasheet (Gebru et al. 2018/2021, seven sections): what the run can
// answer comes from summary.json; what it cannot know comes from the plan's
// "provenance" object, marked "not provided" when missing (docs/datasheet.md).
// Thread-safety: pure functions.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <string>

#include "core/status.h"

namespace prefsift {

// Checks the plan's "provenance" object (usage errors name the key).
Status ValidateProvenance(const nlohmann::ordered_json& provenance);

// datasheet.json. `summary` holds "gate" and "provenance" (FinishSummary);
// `summary_sha256` is the digest of summary.json as written.
nlohmann::ordered_json BuildDatasheet(const nlohmann::ordered_json& provenance, const nlohmann::ordered_json& plan_stages,
                                      const nlohmann::ordered_json& summary, const std::string& summary_sha256);

// datasheet.md, rendered from BuildDatasheet's result.
std::string DatasheetMarkdown(const nlohmann::ordered_json& datasheet);

// The caution printed in the datasheet and the report.
extern const char* const kPersonalDataCaution;

}  // namespace prefsift
