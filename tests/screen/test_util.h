// Helpers shared by the screen tests: fixture reading and the default packs.
#pragma once

#include <string>
#include <vector>

#include "screen/rules.h"
#include "screen/screener.h"

namespace prefsift::screen::testing {

// Rows of a TSV fixture, '#' lines skipped, split on TAB.
std::vector<std::vector<std::string>> ReadTsv(const std::string& name);

const RuleSet& AllPacks();          // the five packs in rules/
const Screener& AllPacksScreener();  // built once with default options
const Rule& RuleById(const std::string& id);

bool PatternMatchesWhole(const std::string& rule_id, const std::string& text);

// Does the rule's pattern match all of `text` and its validator accept all of it?
bool RuleAcceptsWhole(const std::string& rule_id, const std::string& text);

}  // namespace prefsift::screen::testing
