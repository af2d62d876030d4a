#include "test_util.h"

#include <fstream>
#include <map>
#include <memory>
#include <sstream>
#include <stdexcept>

#include <re2/re2.h>

#include "io/file_system.h"
#include "screen/validators.h"

namespace prefsift::screen::testing {

std::vector<std::vector<std::string>> ReadTsv(const std::string& name) {
  std::ifstream in(std::string(PREFSIFT_SCREEN_DATA_DIR) + "/" + name);
  if (!in) throw std::runtime_error("missing fixture " + name);
  std::vector<std::vector<std::string>> rows;
  std::string line;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#') continue;
    std::vector<std::string> cols;
    std::stringstream ss(line);
    std::string c;
    while (std::getline(ss, c, '\t')) cols.push_back(c);
    rows.push_back(cols);
  }
  return rows;
}

const RuleSet& AllPacks() {
  static const RuleSet* set = [] {
    auto r = LoadRulePacks(DefaultFileSystem(), {"contact", "payment", "government", "network", "secrets", "people"}, PREFSIFT_RULES_DIR);
    if (!r.ok()) throw std::runtime_error(r.status().message());
    return new RuleSet(std::move(r).value());
  }();
  return *set;
}

const Screener& AllPacksScreener() {
  static const Screener* s = [] {
    auto r = Screener::Build(AllPacks());
    if (!r.ok()) throw std::runtime_error(r.status().message());
    return new Screener(std::move(r).value());
  }();
  return *s;
}

const Rule& RuleById(const std::string& id) {
  for (const Rule& r : AllPacks().rules) {
    if (r.id == id) return r;
  }
  throw std::runtime_error("no rule " + id);
}

bool PatternMatchesWhole(const std::string& rule_id, const std::string& text) {
  const Rule& r = RuleById(rule_id);
  static std::map<std::string, std::unique_ptr<RE2>> cache;  // tests run on one thread
  auto& re = cache[rule_id];
  if (!re) {
    RE2::Options o;
    o.set_log_errors(false);
    re = std::make_unique<RE2>(r.shape, o);
  }
  return RE2::FullMatch(text, *re);
}

bool RuleAcceptsWhole(const std::string& rule_id, const std::string& text) {
  const Rule& r = RuleById(rule_id);
  if (!PatternMatchesWhole(rule_id, text)) return false;
  if (r.check.empty()) return true;
  size_t end = text.size();
  return FindValidator(r.check)(text, 0, &end) && end == text.size();
}

}  // namespace prefsift::screen::testing
