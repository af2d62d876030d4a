// Rule pack loader. See rules.h. Exceptions from the JSON parser are caught
// here and turned into a Status; none leave this file.
#include "screen/rules.h"

#include <fstream>
#include <set>
#include <sstream>

#include <nlohmann/json.hpp>
#include <re2/re2.h>

#include "screen/validators.h"

namespace prefsift::screen {
namespace {

using nlohmann::json;

int LineOfOffset(std::string_view text, size_t off) {
  int line = 1;
  for (size_t i = 0; i < off && i < text.size(); ++i) line += text[i] == '\n';
  return line;
}

// Line of the first `"id": "<id>"` in the file text (0 if not found).
int LineOfRuleId(std::string_view text, const std::string& id) {
  std::string quoted = "\"" + id + "\"";
  size_t pos = 0;
  while ((pos = text.find(quoted, pos)) != std::string_view::npos) {
    size_t k = pos;
    while (k > 0 && (text[k - 1] == ' ' || text[k - 1] == '\t' || text[k - 1] == '\n' ||
                     text[k - 1] == '\r')) {
      --k;
    }
    if (k > 0 && text[k - 1] == ':') return LineOfOffset(text, pos);
    pos += quoted.size();
  }
  return 0;
}

std::string Where(const std::string& file, int line, const std::string& id) {
  std::ostringstream os;
  os << file << ":" << line << ": rule '" << id << "': ";
  return os.str();
}

Result<std::vector<std::string>> StringList(const json& j, const char* key, const std::string& where) {
  std::vector<std::string> out;
  if (!j.contains(key)) return out;
  const json& a = j.at(key);
  if (!a.is_array()) return Status::Usage(where + "'" + key + "' must be an array of strings");
  for (const json& s : a) {
    if (!s.is_string() || s.get<std::string>().empty()) {
      return Status::Usage(where + "'" + key + "' must be an array of non-empty strings");
    }
    std::string w = s.get<std::string>();
    for (char& c : w) {
      if (c >= 'A' && c <= 'Z') c = static_cast<char>(c - 'A' + 'a');
    }
    out.push_back(std::move(w));
  }
  return out;
}

Status ParseRule(const json& j, std::string_view text, const std::string& file, Rule* r) {
  if (!j.is_object()) return Status::Usage(file + ": every entry of 'rules' must be an object");
  if (!j.contains("id") || !j.at("id").is_string() || j.at("id").get<std::string>().empty()) {
    return Status::Usage(file + ": a rule has no string 'id'");
  }
  r->id = j.at("id").get<std::string>();
  r->source_file = file;
  r->source_line = LineOfRuleId(text, r->id);
  const std::string where = Where(file, r->source_line, r->id);

  static const std::set<std::string> kKnown = {"id", "description", "pattern", "validator", "context",
                                               "fields", "severity", "action", "confidence"};
  for (auto it = j.begin(); it != j.end(); ++it) {
    if (!kKnown.count(it.key())) return Status::Usage(where + "unknown field '" + it.key() + "'");
  }
  if (!j.contains("pattern") || !j.at("pattern").is_string() || j.at("pattern").get<std::string>().empty()) {
    return Status::Usage(where + "'pattern' must be a non-empty string");
  }
  r->pattern = j.at("pattern").get<std::string>();
  if (j.contains("description")) {
    if (!j.at("description").is_string()) return Status::Usage(where + "'description' must be a string");
    r->description = j.at("description").get<std::string>();
  }
  if (j.contains("validator")) {
    if (!j.at("validator").is_string()) return Status::Usage(where + "'validator' must be a string");
    r->validator = j.at("validator").get<std::string>();
    if (FindValidator(r->validator) == nullptr) {
      return Status::Usage(where + "unknown validator '" + r->validator + "'");
    }
  }
  if (j.contains("fields")) {
    auto f = StringList(j, "fields", where);
    if (!f.ok()) return f.status();
    if (f.value().empty()) return Status::Usage(where + "'fields' must not be empty");
    for (bool& b : r->fields) b = false;
    for (const std::string& s : f.value()) {
      if (s == "prompt") r->fields[0] = true;
      else if (s == "candidates") r->fields[1] = true;
      else if (s == "metadata") r->fields[2] = true;
      else return Status::Usage(where + "unknown field kind '" + s + "' (prompt, candidates, metadata)");
    }
  }
  if (j.contains("severity")) {
    const json& s = j.at("severity");
    std::string v = s.is_string() ? s.get<std::string>() : "";
    if (v == "low") r->severity = Severity::kLow;
    else if (v == "medium") r->severity = Severity::kMedium;
    else if (v == "high") r->severity = Severity::kHigh;
    else if (v == "critical") r->severity = Severity::kCritical;
    else return Status::Usage(where + "'severity' must be low, medium, high or critical");
  }
  if (j.contains("action")) {
    const json& a = j.at("action");
    std::string v = a.is_string() ? a.get<std::string>() : "";
    if (v == "flag") r->action = Action::kFlag;
    else if (v == "mask") r->action = Action::kMask;
    else if (v == "pseudonymise") r->action = Action::kPseudonymise;
    else if (v == "drop") r->action = Action::kDrop;
    else return Status::Usage(where + "'action' must be flag, mask, pseudonymise or drop");
  }
  if (j.contains("confidence")) {
    const json& c = j.at("confidence");
    if (!c.is_number() || c.get<double>() < 0.0 || c.get<double>() > 1.0) {
      return Status::Usage(where + "'confidence' must be a number in [0, 1]");
    }
    r->confidence = c.get<double>();
  }
  if (j.contains("context")) {
    const json& c = j.at("context");
    if (!c.is_object()) return Status::Usage(where + "'context' must be an object");
    static const std::set<std::string> kCtx = {"window", "boost_words", "boost", "required_words", "deny_words"};
    for (auto it = c.begin(); it != c.end(); ++it) {
      if (!kCtx.count(it.key())) return Status::Usage(where + "unknown context field '" + it.key() + "'");
    }
    if (c.contains("window")) {
      if (!c.at("window").is_number_integer() || c.at("window").get<int>() < 0 ||
          c.at("window").get<int>() > 1000) {
        return Status::Usage(where + "'context.window' must be an integer in [0, 1000]");
      }
      r->context.window = c.at("window").get<int>();
    }
    if (c.contains("boost")) {
      if (!c.at("boost").is_number() || c.at("boost").get<double>() < -1.0 || c.at("boost").get<double>() > 1.0) {
        return Status::Usage(where + "'context.boost' must be a number in [-1, 1]");
      }
      r->context.boost = c.at("boost").get<double>();
    }
    auto b = StringList(c, "boost_words", where);
    if (!b.ok()) return b.status();
    auto q = StringList(c, "required_words", where);
    if (!q.ok()) return q.status();
    auto d = StringList(c, "deny_words", where);
    if (!d.ok()) return d.status();
    r->context.boost_words = std::move(b).value();
    r->context.required_words = std::move(q).value();
    r->context.deny_words = std::move(d).value();
  }
  // Compile once here so a bad pattern stops the run before anything is read.
  RE2::Options opt;
  opt.set_log_errors(false);
  RE2 re(r->pattern, opt);
  if (!re.ok()) {
    return Status::Usage(where + "bad pattern: " + re.error());
  }
  return Status::Ok();
}

}  // namespace

std::string_view FieldKindName(FieldKind f) {
  switch (f) {
    case FieldKind::kPrompt: return "prompt";
    case FieldKind::kCandidate: return "candidates";
    case FieldKind::kMetadata: return "metadata";
  }
  return "?";
}

std::string_view ActionName(Action a) {
  switch (a) {
    case Action::kFlag: return "flag";
    case Action::kMask: return "mask";
    case Action::kPseudonymise: return "pseudonymise";
    case Action::kDrop: return "drop";
  }
  return "?";
}

std::string_view SeverityName(Severity s) {
  switch (s) {
    case Severity::kLow: return "low";
    case Severity::kMedium: return "medium";
    case Severity::kHigh: return "high";
    case Severity::kCritical: return "critical";
  }
  return "?";
}

Result<RuleSet> ParseRulePack(std::string_view text, const std::string& source_name) {
  json doc;
  try {
    doc = json::parse(text.begin(), text.end(), nullptr, /*allow_exceptions=*/true, /*ignore_comments=*/true);
  } catch (const json::parse_error& e) {
    return Status::Usage(source_name + ":" + std::to_string(LineOfOffset(text, e.byte > 0 ? e.byte - 1 : 0)) +
                         ": not valid JSON: " + e.what());
  } catch (const json::exception& e) {
    // E.g. a number too large for a double (out_of_range.406): not a syntax error, still unreadable.
    return Status::Usage(source_name + ": not valid JSON: " + e.what());
  }
  if (!doc.is_object() || !doc.contains("rules") || !doc.at("rules").is_array()) {
    return Status::Usage(source_name + ": a rule pack must be an object with a 'rules' array");
  }
  for (auto it = doc.begin(); it != doc.end(); ++it) {
    if (it.key() != "pack" && it.key() != "description" && it.key() != "rules") {
      return Status::Usage(source_name + ": unknown top-level field '" + it.key() + "'");
    }
  }
  RuleSet set;
  for (const json& j : doc.at("rules")) {
    Rule r;
    Status s = ParseRule(j, text, source_name, &r);
    if (!s.ok()) return s;
    set.rules.push_back(std::move(r));
  }
  return set;
}

Result<RuleSet> LoadRulePacks(const std::vector<std::string>& names_or_paths, const std::string& rules_dir) {
  RuleSet all;
  std::set<std::string> ids;
  for (const std::string& n : names_or_paths) {
    bool is_name = n.find('/') == std::string::npos &&
                   !(n.size() >= 5 && n.compare(n.size() - 5, 5, ".json") == 0);
    std::string path = is_name ? rules_dir + "/" + n + ".json" : n;
    std::ifstream in(path, std::ios::binary);
    if (!in) {
      return Status::Usage(is_name ? "rule pack '" + n + "' not found (looked for " + path + ")"
                                   : "cannot read rule pack " + path);
    }
    std::ostringstream buf;
    buf << in.rdbuf();
    std::string text = buf.str();
    auto pack = ParseRulePack(text, path);
    if (!pack.ok()) return pack.status();
    for (Rule& r : pack.value().rules) {
      if (!ids.insert(r.id).second) {
        return Status::Usage(Where(path, r.source_line, r.id) + "rule id already defined by an earlier pack");
      }
      all.rules.push_back(std::move(r));
    }
  }
  return all;
}

}  // namespace prefsift::screen
