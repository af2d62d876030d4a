// Reads the TSV fixtures written by tests/reference/stats_reference.py:
// '#' lines are comments, fields are tab-separated, list fields are
// comma-separated numbers. Test-only helper, not thread-safe concerns.
#pragma once

#include <string>
#include <vector>

namespace prefsift::stats::testing {

// Rows of tab-separated fields of tests/data/stats/<name>. Empty if missing.
std::vector<std::vector<std::string>> ReadFixture(const std::string& name);

// "1.5,2,3e-4" -> {1.5, 2, 3e-4}; separator configurable.
std::vector<double> ParseList(const std::string& field, char sep = ',');
std::vector<std::string> Split(const std::string& s, char sep);
double ParseDouble(const std::string& s);

}  // namespace prefsift::stats::testing
