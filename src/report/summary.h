// summary.json (the ledger and every stage's section) and the short ledger
// table printed on stderr. docs/outputs.md documents every key.
#pragma once

#include <nlohmann/json.hpp>

#include <cstdio>
#include <map>
#include <string>
#include <utility>
#include <vector>

#include "core/plan.h"
#include "core/run_state.h"

namespace prefsift {

// `stage_sections`: each stage's section (its Report), in pipeline order; the
// summary renders them as given and computes nothing of a stage's.
nlohmann::ordered_json BuildSummary(const Plan& plan, const RunState& st,
                                    const std::vector<std::pair<std::string, nlohmann::ordered_json>>& stage_sections,
                                    const std::map<std::string, uint64_t>& written);

void PrintLedgerTable(const nlohmann::ordered_json& summary, std::FILE* out);

}  // namespace prefsift
