// Annotator quality in the datasheet and the HTML report, read from
// summary.json's stages.annotators section (docs/annotators.md). Kept apart
// from datasheet.cc and html_report.cc so those files only call in.
// Thread-safety: pure functions.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <string>

namespace prefsift {

// Facts for the datasheet's collection section: [{"fact": ..., "value": ...}].
nlohmann::ordered_json CollectionFacts(const nlohmann::ordered_json& summary);

// The report.html section: alpha with its interval, per-source figures, the
// annotator table (candidates for review first), cycles and rushed judgments.
// "" when the summary has no annotators section (a whole-store summary).
std::string AnnotatorsSection(const nlohmann::ordered_json& summary);

}  // namespace prefsift
