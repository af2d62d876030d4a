// summary.json (the ledger and every stage's section) and the short ledger
// table printed on stderr. docs/outputs.md documents every key.
#pragma once

#include <nlohmann/json.hpp>

#include <cstdio>
#include <map>
#include <string>
#include <vector>

#include "core/run_state.h"
#include "stages/stage.h"

namespace prefsift {

nlohmann::ordered_json BuildSummary(const Plan& plan, const RunState& st, const std::vector<const Stage*>& stages,
                                    const std::map<std::string, uint64_t>& written);

void PrintLedgerTable(const nlohmann::ordered_json& summary, std::FILE* out);

}  // namespace prefsift
