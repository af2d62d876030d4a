// Rule pack loader. See rules.h. Exceptions from the JSON parser are caught
// here and turned into a Status; none leave this file.
#include "screen/rules.h"

#include <map>
#include <mutex>
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

// Line of the first `"<key>": "<id>"` at or after *from in the file text (0
// if not found); *from moves past it, so rules sharing a kind get their own line.
int LineOfRuleId(std::string_view text, const std::string& id, size_t* from = nullptr) {
  std::string quoted = "\"" + id + "\"";
  size_t pos = from ? *from : 0;
  while ((pos = text.find(quoted, pos)) != std::string_view::npos) {
    size_t k = pos;
    while (k > 0 && (text[k - 1] == ' ' || text[k - 1] == '\t' || text[k - 1] == '\n' ||
                     text[k - 1] == '\r')) {
      --k;
    }
    if (k > 0 && text[k - 1] == ':') {
      if (from) *from = pos + quoted.size();
      return LineOfOffset(text, pos);
    }
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

// Keys of the old rule format, each with what replaces it, so an old pack
// fails with a message that names the new key.
const char* RenamedRuleKey(const std::string& k) {
  if (k == "id") return "'id' is now 'kind' (a kind id such as \"card-number\"; docs/personal-data.md, \"Kind ids\")";
  if (k == "description") return "'description' is now 'about'";
  if (k == "pattern") return "'pattern' is now 'shape'";
  if (k == "validator") return "'validator' is now 'check' (checks are named by their algorithm, e.g. \"luhn\")";
  if (k == "confidence") return "'confidence' is now 'certainty'";
  if (k == "context") return "'context' is now 'nearby' (with 'reach', 'raise_with', 'raise_by', 'only_with', "
                             "'never_with')";
  if (k == "severity") return "'severity' is gone: overlapping findings are settled by 'certainty', then span "
                              "length, then load order (docs/personal-data.md, \"Overlaps\")";
  return nullptr;
}

const char* RenamedNearbyKey(const std::string& k) {
  if (k == "window") return "'window' is now 'nearby.reach'";
  if (k == "boost_words") return "'boost_words' is now 'nearby.raise_with'";
  if (k == "boost") return "'boost' is now 'nearby.raise_by'";
  if (k == "required_words") return "'required_words' is now 'nearby.only_with'";
  if (k == "deny_words") return "'deny_words' is now 'nearby.never_with'";
  return nullptr;
}

// Kind ids and vendors: lower-case ASCII words joined by single hyphens.
bool IsKindWord(const std::string& s) {
  if (s.empty() || s.front() == '-' || s.back() == '-') return false;
  for (size_t i = 0; i < s.size(); ++i) {
    char c = s[i];
    bool ok = (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '-';
    if (!ok || (c == '-' && s[i - 1] == '-')) return false;
  }
  return true;
}

// One word a line; '#' starts a comment line; blank lines skipped. Words are
// ASCII-lower-cased. Lists are shared by every rule that names the same file.
Result<std::shared_ptr<const WordList>> LoadWordList(FileSystem* fs, const std::string& path,
                                                     const std::string& where) {
  if (fs == nullptr) return Status::Usage(where + "the word list " + path + " cannot be read here (no file system)");
  auto read = ReadWholeFile(fs, path);
  if (!read.ok()) return Status::Usage(where + "cannot read the word list " + path);
  // Shared by path and content: the same file read again (or on another file
  // system) with other words is another list.
  static std::mutex mu;
  static std::map<std::string, std::shared_ptr<const WordList>> cache;
  const std::string key = path + '\0' + read.value();
  std::lock_guard<std::mutex> lock(mu);
  auto it = cache.find(key);
  if (it != cache.end()) return it->second;
  auto list = std::make_shared<WordList>();
  std::istringstream in(read.value());
  std::string line;
  while (std::getline(in, line)) {
    while (!line.empty() && (line.back() == '\r' || line.back() == ' ')) line.pop_back();
    if (line.empty() || line[0] == '#') continue;
    for (char& c : line) {
      if (c >= 'A' && c <= 'Z') c = static_cast<char>(c - 'A' + 'a');
    }
    list->insert(line);
  }
  if (list->empty()) return Status::Usage(where + "the word list " + path + " is empty");
  cache[key] = list;
  return std::shared_ptr<const WordList>(list);
}

Status ParseRule(const json& j, std::string_view text, const std::string& file, const std::string& family,
                 FileSystem* fs, size_t* cursor, Rule* r) {
  if (!j.is_object()) return Status::Usage(file + ": every entry of 'rules' must be an object");
  if (!j.contains("kind") || !j.at("kind").is_string() || j.at("kind").get<std::string>().empty()) {
    if (j.contains("id")) {
      std::string old = j.at("id").is_string() ? j.at("id").get<std::string>() : "?";
      return Status::Usage(Where(file, j.at("id").is_string() ? LineOfRuleId(text, old) : 0, old) +
                           RenamedRuleKey("id"));
    }
    return Status::Usage(file + ": a rule has no string 'kind'");
  }
  r->kind = j.at("kind").get<std::string>();
  r->family = family;
  r->source_file = file;
  r->source_line = LineOfRuleId(text, r->kind, cursor);
  if (j.contains("vendor")) {
    if (!j.at("vendor").is_string() || !IsKindWord(j.at("vendor").get<std::string>())) {
      return Status::Usage(Where(file, r->source_line, r->kind) +
                           "'vendor' must be lower-case letters and digits joined by single hyphens");
    }
    r->vendor = j.at("vendor").get<std::string>();
  }
  if (j.contains("variant")) {
    if (!j.at("variant").is_string() || !IsKindWord(j.at("variant").get<std::string>())) {
      return Status::Usage(Where(file, r->source_line, r->kind) +
                           "'variant' must be lower-case letters and digits joined by single hyphens");
    }
    if (!r->vendor.empty()) {
      return Status::Usage(Where(file, r->source_line, r->kind) + "give either 'vendor' or 'variant', not both");
    }
    r->variant = j.at("variant").get<std::string>();
  }
  r->id = !r->vendor.empty() ? r->kind + "/" + r->vendor : !r->variant.empty() ? r->kind + "/" + r->variant : r->kind;
  const std::string where = Where(file, r->source_line, r->id);
  if (!IsKindWord(r->kind)) {
    return Status::Usage(where + "'kind' must be lower-case letters and digits joined by single hyphens");
  }

  static const std::set<std::string> kKnown = {"kind", "vendor", "variant", "about", "shape", "check", "nearby",
                                               "fields", "action", "certainty", "first_word_in", "not_in_span", "beside"};
  for (auto it = j.begin(); it != j.end(); ++it) {
    if (kKnown.count(it.key())) continue;
    if (const char* m = RenamedRuleKey(it.key())) return Status::Usage(where + m);
    return Status::Usage(where + "unknown field '" + it.key() + "'");
  }
  if (!j.contains("shape") || !j.at("shape").is_string() || j.at("shape").get<std::string>().empty()) {
    return Status::Usage(where + "'shape' must be a non-empty string (an RE2 pattern)");
  }
  r->shape = j.at("shape").get<std::string>();
  if (j.contains("about")) {
    if (!j.at("about").is_string()) return Status::Usage(where + "'about' must be a string");
    r->about = j.at("about").get<std::string>();
  }
  if (j.contains("check")) {
    if (!j.at("check").is_string()) return Status::Usage(where + "'check' must be a string");
    r->check = j.at("check").get<std::string>();
    if (FindValidator(r->check) == nullptr) {
      std::string m = where + "unknown check '" + r->check + "'";
      if (const char* now = RenamedCheck(r->check)) m += " (renamed: use '" + std::string(now) + "')";
      return Status::Usage(m);
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
  if (j.contains("action")) {
    const json& a = j.at("action");
    std::string v = a.is_string() ? a.get<std::string>() : "";
    if (v == "flag") r->action = Action::kFlag;
    else if (v == "mask") r->action = Action::kMask;
    else if (v == "pseudonymise") r->action = Action::kPseudonymise;
    else if (v == "drop") r->action = Action::kDrop;
    else return Status::Usage(where + "'action' must be flag, mask, pseudonymise or drop");
  }
  if (j.contains("certainty")) {
    const json& c = j.at("certainty");
    if (!c.is_number() || c.get<double>() < 0.0 || c.get<double>() > 1.0) {
      return Status::Usage(where + "'certainty' must be a number in [0, 1]");
    }
    r->certainty = c.get<double>();
  }
  if (j.contains("nearby")) {
    const json& c = j.at("nearby");
    if (!c.is_object()) return Status::Usage(where + "'nearby' must be an object");
    static const std::set<std::string> kNear = {"reach", "raise_with", "raise_by", "only_with", "never_with"};
    for (auto it = c.begin(); it != c.end(); ++it) {
      if (kNear.count(it.key())) continue;
      if (const char* m = RenamedNearbyKey(it.key())) return Status::Usage(where + m);
      return Status::Usage(where + "unknown 'nearby' field '" + it.key() + "'");
    }
    if (c.contains("reach")) {
      if (!c.at("reach").is_number_integer() || c.at("reach").get<int>() < 0 || c.at("reach").get<int>() > 1000) {
        return Status::Usage(where + "'nearby.reach' must be an integer in [0, 1000] (bytes on each side)");
      }
      r->nearby.reach = c.at("reach").get<int>();
    }
    if (c.contains("raise_by")) {
      if (!c.at("raise_by").is_number() || c.at("raise_by").get<double>() < -1.0 ||
          c.at("raise_by").get<double>() > 1.0) {
        return Status::Usage(where + "'nearby.raise_by' must be a number in [-1, 1]");
      }
      r->nearby.raise_by = c.at("raise_by").get<double>();
    }
    auto b = StringList(c, "raise_with", where);
    if (!b.ok()) return b.status();
    auto q = StringList(c, "only_with", where);
    if (!q.ok()) return q.status();
    auto d = StringList(c, "never_with", where);
    if (!d.ok()) return d.status();
    r->nearby.raise_with = std::move(b).value();
    r->nearby.only_with = std::move(q).value();
    r->nearby.never_with = std::move(d).value();
  }
  if (j.contains("first_word_in")) {
    if (!j.at("first_word_in").is_string() || j.at("first_word_in").get<std::string>().empty()) {
      return Status::Usage(where + "'first_word_in' must be the path of a word list, relative to the pack's folder");
    }
    std::string rel = j.at("first_word_in").get<std::string>();
    std::string dir = file.find('/') == std::string::npos ? "." : file.substr(0, file.find_last_of('/'));
    std::string path = !rel.empty() && rel[0] == '/' ? rel : dir + "/" + rel;
    auto list = LoadWordList(fs, path, where);
    if (!list.ok()) return list.status();
    r->first_word_in = std::move(list).value();
    r->first_word_in_file = rel;
  }
  if (j.contains("not_in_span")) {
    auto b = StringList(j, "not_in_span", where);
    if (!b.ok()) return b.status();
    r->not_in_span = std::move(b).value();
  }
  if (j.contains("beside")) {
    auto b = StringList(j, "beside", where);
    if (!b.ok()) return b.status();
    if (b.value().empty()) return Status::Usage(where + "'beside' must list at least one kind id");
    r->beside = std::move(b).value();
  }
  // Compile once here so a bad pattern stops the run before anything is read.
  RE2::Options opt;
  opt.set_log_errors(false);
  RE2 re(r->shape, opt);
  if (!re.ok()) {
    return Status::Usage(where + "bad shape: " + re.error());
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

Result<RuleSet> ParseRulePack(std::string_view text, const std::string& source_name, FileSystem* fs) {
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
    if (it.key() == "description") {
      return Status::Usage(source_name + ": top-level 'description' is now 'about'");
    }
    if (it.key() != "pack" && it.key() != "about" && it.key() != "rules") {
      return Status::Usage(source_name + ": unknown top-level field '" + it.key() + "'");
    }
  }
  std::string family;
  if (doc.contains("pack")) {
    if (!doc.at("pack").is_string()) return Status::Usage(source_name + ": 'pack' must be a string");
    family = doc.at("pack").get<std::string>();
  } else {
    std::string base = source_name.substr(source_name.find_last_of('/') + 1);
    family = base.size() > 5 && base.compare(base.size() - 5, 5, ".json") == 0 ? base.substr(0, base.size() - 5)
                                                                                 : base;
  }
  RuleSet set;
  size_t cursor = 0;
  for (const json& j : doc.at("rules")) {
    Rule r;
    Status s = ParseRule(j, text, source_name, family, fs, &cursor, &r);
    if (!s.ok()) return s;
    set.rules.push_back(std::move(r));
  }
  return set;
}

Result<RuleSet> LoadRulePacks(FileSystem* fs, const std::vector<std::string>& names_or_paths,
                              const std::string& rules_dir) {
  RuleSet all;
  std::set<std::string> ids;
  for (const std::string& n : names_or_paths) {
    bool is_name = n.find('/') == std::string::npos &&
                   !(n.size() >= 5 && n.compare(n.size() - 5, 5, ".json") == 0);
    std::string path = is_name ? rules_dir + "/" + n + ".json" : n;
    auto read = ReadWholeFile(fs, path);
    if (!read.ok()) {
      return Status::Usage(is_name ? "rule pack '" + n + "' not found (looked for " + path + ")"
                                   : "cannot read rule pack " + path);
    }
    auto pack = ParseRulePack(read.value(), path, fs);
    if (!pack.ok()) return pack.status();
    for (Rule& r : pack.value().rules) {
      if (!ids.insert(r.id).second) {
        return Status::Usage(Where(path, r.source_line, r.id) +
                             "this kind (and vendor) is already defined by an earlier rule; give the new rule a "
                             "'vendor' or another 'kind'");
      }
      all.rules.push_back(std::move(r));
    }
  }
  return all;
}

}  // namespace prefsift::screen
