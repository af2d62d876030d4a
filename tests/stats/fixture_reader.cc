#include "fixture_reader.h"

#include <cstdlib>
#include <fstream>

namespace prefsift::stats::testing {

std::vector<std::string> Split(const std::string& s, char sep) {
  std::vector<std::string> out;
  size_t start = 0;
  while (true) {
    const size_t end = s.find(sep, start);
    out.push_back(s.substr(start, end == std::string::npos ? std::string::npos : end - start));
    if (end == std::string::npos) break;
    start = end + 1;
  }
  return out;
}

double ParseDouble(const std::string& s) { return std::strtod(s.c_str(), nullptr); }

std::vector<double> ParseList(const std::string& field, char sep) {
  std::vector<double> out;
  if (field.empty()) return out;
  for (const std::string& part : Split(field, sep)) out.push_back(ParseDouble(part));
  return out;
}

std::vector<std::vector<std::string>> ReadFixture(const std::string& name) {
  std::vector<std::vector<std::string>> rows;
  std::ifstream in(std::string(PREFSIFT_STATS_DATA_DIR) + "/" + name);
  std::string line;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#') continue;
    rows.push_back(Split(line, '\t'));
  }
  return rows;
}

}  // namespace prefsift::stats::testing
