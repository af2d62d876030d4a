#include "stages/screen/screen_stage.h"

#include <nlohmann/json.hpp>

#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <map>
#include <mutex>
#include <set>
#include <sstream>

#include "core/file_system.h"
#include "core/hash.h"
#include "core/ordered_lines.h"
#include "core/state_file.h"
#include "core/sha256.h"
#include "io/output_dir.h"
#include "screen/actions.h"
#include "screen/rules.h"
#include "screen/screener.h"
#include "stages/screen/hit_rows.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;
namespace fs = std::filesystem;
using screen::Action;
using screen::FieldKind;

constexpr const char* kStage = "screen";
constexpr const char* kFindingsFile = "personal_data_findings.jsonl";

using Part = HitPart;

FieldKind KindOf(Part p) {
  switch (p) {
    case Part::kPrompt:
    case Part::kTurn: return FieldKind::kPrompt;
    case Part::kCandidate: return FieldKind::kCandidate;
    case Part::kMetadata: return FieldKind::kMetadata;
  }
  return FieldKind::kPrompt;
}

const char* const kCautions[] = {
    "The screen is an aid, not a guarantee and not legal advice: rule packs find values with a recognisable shape "
    "(e-mail addresses, phone numbers, card numbers, IBANs, national identifiers, network addresses, secrets, and "
    "names and postal addresses in the phrasings listed below) and miss what does not have one.",
    "Names of people and postal addresses are found only where the text signals them (a self-introduction, greeting, "
    "sign-off or title; a name beside an e-mail, phone or address; a US address with state and ZIP, a UK address "
    "ending in a postcode): a name in a plain sentence, nicknames and other address formats are missed, and product "
    "names built on a title can be masked. Free-text health, religious or other sensitive details are not found at "
    "all; review samples by hand before release.",
    "Which data may be kept, masked, pseudonymised or must be removed is decided by the data-protection law that "
    "applies to the dataset and by the organisation's privacy officer, not by this tool.",
    "Pseudonyms are keyed (HMAC-SHA256): whoever holds the key can test guesses against them; keep the key secret "
    "and separate from the data."};

std::string Resolve(const std::string& base_dir, const std::string& p) {
  if (p.empty() || base_dir.empty() || fs::path(p).is_absolute()) return p;
  return (fs::path(base_dir) / p).string();
}

bool IsJsonName(const std::string& name) { return fs::path(name).extension() == ".json"; }

bool HasJsonFile(FileSystem* files, const fs::path& dir) {
  if (!files->IsDirectory(dir.string())) return false;
  auto names = files->List(dir.string());
  return names.ok() && std::any_of(names.value().begin(), names.value().end(), IsJsonName);
}

// The pointer of a prompt/turn/candidate string in a record of this layout.
std::string PointerOf(const Layout& L, const Hit& h) {
  switch (h.part) {
    case Part::kPrompt: return L.prompt.text;
    case Part::kTurn: return L.prompt.text + "/" + std::to_string(h.index) + L.turn_text.text;
    case Part::kCandidate:
      if (L.judgment == JudgmentShape::kPairwise) return h.index == 0 ? L.chosen.text : L.rejected.text;
      return L.candidates.text + "/" + std::to_string(h.index) + L.candidate_text.text;
    case Part::kMetadata: return h.meta_pointer;
  }
  return "";
}

struct Settings {
  std::vector<std::string> pack_paths;
  std::vector<std::string> pack_labels;  // file names, for the summary
  std::vector<std::string> pack_digests;
  bool fields[screen::kFieldKindCount] = {true, true, true};
  std::string default_action;           // "" = each rule's own
  std::map<std::string, std::string> overrides;
  std::string key_source;               // "key_file", "key_env" or ""
  double certainty_floor = 0.0;
};

class PersonalDataStage : public Stage {
 public:
  PersonalDataStage(Settings settings, screen::RuleSet rules, screen::Screener screener,
                    std::unique_ptr<screen::PseudonymKey> key)
      : settings_(std::move(settings)), rules_(std::move(rules)), screener_(std::move(screener)),
        key_(std::move(key)) {
    for (uint32_t i = 0; i < rules_.rules.size(); ++i) rule_index_[rules_.rules[i].id] = i;
  }

  std::string name() const override { return kStage; }

  void Reserve(size_t n) override { per_record_.reserve(n); }
  void Grow(size_t n) override {
    if (per_record_.size() < n) per_record_.resize(n);
  }

  void Observe(size_t record, const Record& rec, const RecordFacts&, const MatchText&) override {
    RecordHits out;
    ScanRecord(record, rec, &out);
    if (!out.hits.empty() || out.drop || out.rewrite) per_record_.Set(record, out);
  }

  // Every screened text of `rec` into *out (stops at the first scan error).
  void ScanRecord(size_t record, const Record& rec, RecordHits* out_hits) {
    RecordHits& out = *out_hits;
    auto scan = [&](std::string_view text, Part part, uint32_t index, const std::string* meta_pointer) -> bool {
      FieldKind kind = KindOf(part);
      if (!settings_.fields[static_cast<int>(kind)]) return true;
      texts_.fetch_add(1, std::memory_order_relaxed);
      auto found = screener_.Scan(text, kind);
      if (!found.ok()) {
        NoteError(record, found.status());
        return false;
      }
      if (found.value().empty()) return true;
      uint64_t h = HashBytes(text).lo;
      for (const auto& f : found.value()) {
        Hit hit;
        hit.part = part;
        hit.index = index;
        auto it = rule_index_.find(f.rule_id);
        hit.rule = it == rule_index_.end() ? 0 : it->second;
        hit.begin = static_cast<uint32_t>(f.begin);
        hit.end = static_cast<uint32_t>(f.end);
        hit.action = f.action;
        hit.confidence = static_cast<float>(f.certainty);
        hit.text_hash = h;
        if (meta_pointer) hit.meta_pointer = *meta_pointer;
        hit.preview = f.preview;
        if (f.action == Action::kDrop) out.drop = true;
        if (f.action == Action::kMask || f.action == Action::kPseudonymise) out.rewrite = true;
        out.hits.push_back(std::move(hit));
      }
      return true;
    };
    if (rec.prompt_is_chat) {
      for (uint32_t t = 0; t < rec.turns.size(); ++t) {
        if (!scan(rec.turns[t].text, Part::kTurn, t, nullptr)) return;
      }
    } else if (!scan(rec.prompt, Part::kPrompt, 0, nullptr)) {
      return;
    }
    for (uint32_t c = 0; c < rec.candidates.size(); ++c) {
      if (!scan(rec.candidates[c], Part::kCandidate, c, nullptr)) return;
    }
    for (uint32_t m = 0; m < rec.metadata.size(); ++m) {
      if (!scan(rec.metadata[m].text, Part::kMetadata, m, &rec.metadata[m].pointer)) return;
    }
    if (out.drop) out.rewrite = true;
  }

  void SaveObserved(StateWriter& out) const override;
  Status AppendObserved(StateReader& in, size_t first_record) override;

  Status Decide(StageContext& ctx) override {
    RunState& st = ctx.run;
    {
      std::lock_guard<std::mutex> lock(error_mu_);
      if (error_record_ != SIZE_MAX) {
        const Entry& e = st.entries[st.records[error_record_].entry];
        return Status::Internal("the personal-data screen could not scan record " + st.records[error_record_].id +
                                " (" + st.plan().inputs[e.input].name + " line " + std::to_string(e.line) +
                                "): " + error_.message() + "; no output was written, because an unscreened "
                                "record must not pass as clean");
      }
    }
    for (size_t i = 0; i < per_record_.size() && i < st.records.size(); ++i) {
      if (per_record_.hit_count(i) == 0) continue;
      const RecordHits r = per_record_.Get(i);
      ++records_with_findings_;
      if (r.rewrite) ++records_rewritten_;
      for (const Hit& h : r.hits) {
        ++by_rule_[h.rule];
        ++by_field_[static_cast<int>(KindOf(h.part))];
        ++by_action_[static_cast<int>(h.action)];
      }
      if (!r.drop) continue;
      std::set<std::string> ids;
      const Hit* first = nullptr;
      for (const Hit& h : r.hits) {
        if (h.action != Action::kDrop) continue;
        ids.insert(rules_.rules[h.rule].id);
        if (!first) first = &h;
      }
      std::string list;
      for (const auto& id : ids) list += (list.empty() ? "" : ", ") + id;
      const Layout& L = st.plan().inputs[st.entries[st.records[i].entry].input].layout;
      Json detail{{"kinds", std::vector<std::string>(ids.begin(), ids.end())}, {"findings", r.hits.size()}};
      if (st.Reject(i, kStage, "personal_data",
                    "the record contains personal data that the screen is set to drop (" + list +
                        "); see " + kFindingsFile,
                    detail.dump(), PointerOf(L, *first))) {
        ++dropped_;
      }
    }
    return Status::Ok();
  }

  void Report(const RunState& st, Json* s) const override {
    Json packs = Json::array();
    for (size_t i = 0; i < settings_.pack_labels.size(); ++i) {
      size_t n = 0;
      for (const auto& r : rules_.rules) n += r.source_file == settings_.pack_paths[i];
      packs.push_back(Json{{"file", settings_.pack_labels[i]}, {"sha256", settings_.pack_digests[i]}, {"rules", n}});
    }
    (*s)["packs"] = std::move(packs);
    Json fields = Json::array();
    for (int k = 0; k < screen::kFieldKindCount; ++k) {
      if (settings_.fields[k]) fields.push_back(std::string(screen::FieldKindName(static_cast<FieldKind>(k))));
    }
    (*s)["fields"] = std::move(fields);
    (*s)["default_action"] = settings_.default_action.empty() ? "per rule" : settings_.default_action;
    Json overrides = Json::object();
    for (const auto& [id, a] : settings_.overrides) overrides[id] = a;
    (*s)["action_overrides"] = std::move(overrides);
    (*s)["pseudonym_key"] = settings_.key_source.empty() ? "none" : "from " + settings_.key_source + " (never written)";
    (*s)["certainty_floor"] = settings_.certainty_floor;
    (*s)["records_screened"] = std::min(per_record_.size(), st.records.size());
    (*s)["texts_screened"] = texts_.load();
    (*s)["records_with_findings"] = records_with_findings_;
    (*s)["records_rewritten"] = records_rewritten_;
    (*s)["records_dropped"] = dropped_;
    uint64_t total = 0;
    for (const auto& [r, n] : by_rule_) total += n;
    (*s)["findings"] = total;
    Json rules = Json::object();
    for (uint32_t r = 0; r < rules_.rules.size(); ++r) {
      auto it = by_rule_.find(r);
      rules[rules_.rules[r].id] = Json{{"action", std::string(screen::ActionName(rules_.rules[r].action))},
                                       {"findings", it == by_rule_.end() ? 0 : it->second}};
    }
    (*s)["by_rule"] = std::move(rules);
    Json f = Json::object();
    for (int k = 0; k < screen::kFieldKindCount; ++k) {
      f[std::string(screen::FieldKindName(static_cast<FieldKind>(k)))] = by_field_[k];
    }
    (*s)["by_field"] = std::move(f);
    Json a = Json::object();
    for (int k = 0; k < 4; ++k) a[std::string(screen::ActionName(static_cast<Action>(k)))] = by_action_[k];
    (*s)["by_action"] = std::move(a);
    (*s)["findings_file"] = kFindingsFile;
    Json cautions = Json::array();
    for (const char* c : kCautions) cautions.push_back(c);
    (*s)["cautions"] = std::move(cautions);
  }

  // Findings left in kept records with no action applied (the gate's figure;
  // "applied": "none" and "kept": true in the findings file).
  void Figures(const RunState& st, GateFigures* g) const override {
    long long left = 0;
    for (size_t i = 0; i < per_record_.size() && i < st.records.size(); ++i) {
      if (per_record_.hit_count(i) == 0 || per_record_.drop(i) || st.decisions[st.records[i].entry].rejected) continue;
      const RecordHits r = per_record_.Get(i);
      for (const Hit& h : r.hits) left += h.action == Action::kFlag ? 1 : 0;
    }
    g->personal_data_left = left;
  }

  // One line per finding, in record order (formatted in parallel blocks).
  Status WriteOutputs(const RunState& st, OutputDir& out) const override {
    auto f = out.CreateStream(kFindingsFile);
    if (!f.ok()) return f.status();
    const size_t n = std::min(per_record_.size(), st.records.size());
    Status s = AppendLinesInOrder(f.value().get(), n, st.plan().threads,
                                  [&](size_t i, std::string* t) { AppendFindingLines(st, i, t); });
    if (!s.ok()) return s;
    return f.value()->Close();
  }

  // The findings file's lines of record i (none when it has no finding).
  void AppendFindingLines(const RunState& st, size_t i, std::string* t) const {
    if (per_record_.hit_count(i) == 0) return;
    const RecordHits r = per_record_.Get(i);
    const RecordFacts& rf = st.records[i];
    const Entry& e = st.entries[rf.entry];
    const Decision& d = st.decisions[rf.entry];
    const Layout& L = st.plan().inputs[e.input].layout;
    for (const Hit& h : r.hits) {
      Json j;
      j["id"] = rf.id;
      j["input"] = st.plan().inputs[e.input].name;
      j["line"] = e.line;
      j["field"] = std::string(screen::FieldKindName(KindOf(h.part)));
      if (h.part == Part::kCandidate) j["candidate"] = h.index;
      if (h.part == Part::kTurn) j["turn"] = h.index;
      j["pointer"] = PointerOf(L, h);
      j["kind"] = rules_.rules[h.rule].kind;
      if (!rules_.rules[h.rule].vendor.empty()) j["vendor"] = rules_.rules[h.rule].vendor;
      j["family"] = rules_.rules[h.rule].family;
      j["begin"] = h.begin;
      j["end"] = h.end;
      j["action"] = std::string(screen::ActionName(h.action));
      j["applied"] = r.drop ? "masked (record dropped)"
                     : h.action == Action::kFlag ? "none"
                     : h.action == Action::kMask ? "masked" : "pseudonymised";
      j["certainty"] = std::round(static_cast<double>(h.confidence) * 1000.0) / 1000.0;
      j["preview"] = h.preview;
      j["kept"] = !d.rejected;
      *t += j.dump();
      *t += '\n';
    }
  }

  void SaveRewrites(StateWriter& out, size_t first, size_t count) const override;
  Status LoadRewrites(StateReader& in, size_t count) override;
  bool Rewrites(size_t record) const override {
    return record < per_record_.size() && per_record_.rewrite(record);
  }

  Status Rewrite(size_t record, const InputSpec& input, Json* doc) const override {
    const RecordHits r = per_record_.Get(record);
    const Layout& L = input.layout;
    size_t i = 0;
    while (i < r.hits.size()) {
      // Hits of one string are consecutive (scan order).
      size_t j = i;
      std::string ptr = PointerOf(L, r.hits[i]);
      std::vector<screen::Finding> findings;
      while (j < r.hits.size() && PointerOf(L, r.hits[j]) == ptr && r.hits[j].part == r.hits[i].part &&
             r.hits[j].index == r.hits[i].index) {
        const Hit& h = r.hits[j];
        screen::Finding f;
        f.rule_id = rules_.rules[h.rule].id;
        f.kind = rules_.rules[h.rule].kind;
        f.field = KindOf(h.part);
        f.begin = h.begin;
        f.end = h.end;
        // A dropped record's copy in rejects.jsonl is masked everywhere.
        f.action = r.drop ? Action::kMask : h.action;
        findings.push_back(std::move(f));
        ++j;
      }
      try {
        Json::json_pointer jp(ptr);
        Json& v = doc->at(jp);
        if (!v.is_string()) return Status::Internal("screen: the value at " + ptr + " is no longer a string");
        std::string& text = v.get_ref<std::string&>();
        if (HashBytes(text).lo != r.hits[i].text_hash) {
          return Status::Internal("screen: the text at " + ptr + " changed between the two passes");
        }
        text = screen::ApplyActions(text, findings, key_.get());
      } catch (const std::exception&) {
        return Status::Internal("screen: cannot find the value at " + ptr + " when rewriting the record");
      }
      i = j;
    }
    return Status::Ok();
  }

 private:
  void NoteError(size_t record, const Status& s) {
    std::lock_guard<std::mutex> lock(error_mu_);
    if (record < error_record_) {
      error_record_ = record;
      error_ = s;
    }
  }

  Settings settings_;
  screen::RuleSet rules_;
  screen::Screener screener_;
  std::unique_ptr<screen::PseudonymKey> key_;
  std::map<std::string, uint32_t> rule_index_;
  HitRows per_record_;  // only records with a finding have a row
  std::atomic<uint64_t> texts_{0};
  std::mutex error_mu_;
  size_t error_record_ = SIZE_MAX;
  Status error_;
  uint64_t records_with_findings_ = 0, records_rewritten_ = 0, dropped_ = 0;
  std::map<uint32_t, uint64_t> by_rule_;
  uint64_t by_field_[screen::kFieldKindCount] = {0, 0, 0};
  uint64_t by_action_[4] = {0, 0, 0, 0};
};

bool ParseAction(const Json& v, Action* a) {
  if (!v.is_string()) return false;
  std::string s = v.get<std::string>();
  for (int k = 0; k < 4; ++k) {
    if (s == screen::ActionName(static_cast<Action>(k))) {
      *a = static_cast<Action>(k);
      return true;
    }
  }
  return false;
}

}  // namespace

std::string DefaultRulesDir(FileSystem* files) {
  if (const char* env = std::getenv("PREFSIFT_RULES_DIR"); env && *env) return env;
  std::error_code ec;
  fs::path exe = fs::read_symlink("/proc/self/exe", ec);
  if (ec) return "";
  fs::path d = exe.parent_path();
  for (int up = 0; up <= 4 && !d.empty(); ++up) {
    for (const fs::path& cand : {d / "share" / "prefsift" / "rules", d / "rules"}) {
      if (HasJsonFile(files, cand)) return cand.string();
    }
    if (d == d.parent_path()) break;
    d = d.parent_path();
  }
#ifdef PREFSIFT_SOURCE_RULES_DIR
  // Last: the source tree's rules folder, recorded at build time, so a binary
  // built outside the checkout (cmake -B /elsewhere) still finds the packs.
  if (HasJsonFile(files, PREFSIFT_SOURCE_RULES_DIR)) return PREFSIFT_SOURCE_RULES_DIR;
#endif
  return "";
}

namespace {

// The stage's settings as read from the plan, before the packs are loaded.
struct ScreenPlan {
  Settings settings;
  std::vector<std::string> packs;
  bool packs_given = false;
  std::string rules_dir, key_file, key_env;
  Action default_action = Action::kFlag;
  bool has_default = false;
  std::map<std::string, Action> overrides;
};

// Reads and checks every key of the plan's "screen" object.
Status ParseScreenSettings(const Json& s, const std::string& base_dir, ScreenPlan* p) {
  if (!s.is_object()) return Status::Usage("stages.screen: must be an object");
  for (auto it = s.begin(); it != s.end(); ++it) {
    const std::string& k = it.key();
    const Json& v = it.value();
    if (k == "enabled") continue;
    if (k == "packs") {
      if (!v.is_array()) return Status::Usage("stages.screen.packs: must be an array of pack names or paths");
      for (const auto& pack : v) {
        if (!pack.is_string() || pack.get<std::string>().empty()) {
          return Status::Usage("stages.screen.packs: every entry must be a non-empty string (a pack name or a path)");
        }
        p->packs.push_back(pack.get<std::string>());
      }
      p->packs_given = true;
    } else if (k == "rules_dir") {
      if (!v.is_string() || v.get<std::string>().empty()) return Status::Usage("stages.screen.rules_dir: must be a folder path");
      p->rules_dir = Resolve(base_dir, v.get<std::string>());
    } else if (k == "action") {
      if (!ParseAction(v, &p->default_action)) {
        return Status::Usage("stages.screen.action: must be \"flag\", \"mask\", \"pseudonymise\" or \"drop\"");
      }
      p->has_default = true;
      p->settings.default_action = v.get<std::string>();
    } else if (k == "actions") {
      return Status::Usage("stages.screen.actions is now \"action_by_kind\": {\"<kind id>\": \"<action>\"}, keyed by kind "
                   "ids such as \"mailbox-address\" (docs/personal-data.md, \"Kind ids\")");
    } else if (k == "action_by_kind") {
      if (!v.is_object()) {
        return Status::Usage("stages.screen.action_by_kind: must be an object {\"<kind id>\": \"<action>\"}");
      }
      for (auto a = v.begin(); a != v.end(); ++a) {
        Action act;
        if (!ParseAction(a.value(), &act)) {
          return Status::Usage("stages.screen.action_by_kind." + a.key() +
                       ": must be \"flag\", \"mask\", \"pseudonymise\" or \"drop\"");
        }
        p->overrides[a.key()] = act;
        p->settings.overrides[a.key()] = a.value().get<std::string>();
      }
    } else if (k == "key_file") {
      if (!v.is_string() || v.get<std::string>().empty()) return Status::Usage("stages.screen.key_file: must be a file path");
      p->key_file = Resolve(base_dir, v.get<std::string>());
    } else if (k == "key_env") {
      if (!v.is_string() || v.get<std::string>().empty()) {
        return Status::Usage("stages.screen.key_env: must be the name of an environment variable");
      }
      p->key_env = v.get<std::string>();
    } else if (k == "fields") {
      if (!v.is_array() || v.empty()) {
        return Status::Usage("stages.screen.fields: must be a non-empty array of \"prompt\", \"candidates\", \"metadata\"");
      }
      std::fill(std::begin(p->settings.fields), std::end(p->settings.fields), false);
      for (const auto& f : v) {
        bool ok = false;
        for (int q = 0; q < screen::kFieldKindCount; ++q) {
          if (f.is_string() && f.get<std::string>() == screen::FieldKindName(static_cast<FieldKind>(q))) {
            p->settings.fields[q] = ok = true;
          }
        }
        if (!ok) return Status::Usage("stages.screen.fields: unknown field " + f.dump() + " (prompt, candidates, metadata)");
      }
    } else if (k == "min_confidence") {
      return Status::Usage("stages.screen.min_confidence is now \"certainty_floor\" (findings whose certainty, after nearby "
                   "words, is below it are not reported)");
    } else if (k == "certainty_floor") {
      if (!v.is_number() || v.get<double>() < 0 || v.get<double>() > 1) {
        return Status::Usage("stages.screen.certainty_floor: must be a number in [0, 1]");
      }
      p->settings.certainty_floor = v.get<double>();
    } else {
      return Status::Usage("stages.screen: unknown setting \"" + k +
                   "\" (known: packs, rules_dir, action, action_by_kind, key_file, key_env, fields, certainty_floor)");
    }
  }
  if (!p->key_file.empty() && !p->key_env.empty()) {
    return Status::Usage("stages.screen: set either \"key_file\" or \"key_env\", not both");
  }
  return Status::Ok();
}

// The pack files to load: the named or given packs, or every pack of the
// rules folder.
Status ResolvePacks(FileSystem* files, const std::string& base_dir, ScreenPlan* p) {
  if (p->rules_dir.empty()) p->rules_dir = DefaultRulesDir(files);
  // Packs: names resolve in rules_dir; paths relative to the plan's folder.
  if (!p->packs_given) {
    if (p->rules_dir.empty()) {
      return Status::Usage("stages.screen: no rules folder found; set \"rules_dir\" in the plan or the environment variable "
                   "PREFSIFT_RULES_DIR (docs/personal-data.md, \"Pipeline stage\")");
    }
    auto names = files->List(p->rules_dir);
    if (!names.ok()) return Status::Usage("stages.screen.rules_dir: cannot read the folder " + p->rules_dir);
    for (const std::string& name : names.value()) {
      if (IsJsonName(name)) p->packs.push_back((fs::path(p->rules_dir) / name).string());
    }
    if (p->packs.empty()) return Status::Usage("stages.screen.rules_dir: no .json rule packs in " + p->rules_dir);
  }
  for (auto& pack : p->packs) {
    bool is_name =
        pack.find('/') == std::string::npos && !(pack.size() >= 5 && pack.compare(pack.size() - 5, 5, ".json") == 0);
    if (is_name) {
      if (p->rules_dir.empty()) {
        return Status::Usage("stages.screen.packs: pack \"" + pack + "\" is a name but no rules folder was found; set "
                             "\"rules_dir\" or PREFSIFT_RULES_DIR");
      }
      pack = p->rules_dir + "/" + pack + ".json";
    } else {
      pack = Resolve(base_dir, pack);
    }
  }
  return Status::Ok();
}

// The plan's default action, then its per-kind (or kind/vendor) overrides.
Status ApplyPlanActions(const ScreenPlan& p, screen::RuleSet* rules) {
  for (auto& r : rules->rules) {
    if (p.has_default) r.action = p.default_action;
  }
  // A key is a kind id (all its rules) or kind/vendor (one rule).
  for (const auto& [id, act] : p.overrides) {
    bool any = false;
    for (auto& r : rules->rules) {
      if (r.kind == id || r.id == id) {
        r.action = act;
        any = true;
      }
    }
    if (!any) return Status::Usage("stages.screen.action_by_kind: no kind \"" + id + "\" in the loaded packs");
  }
  return Status::Ok();
}

// The pseudonym key: read only when given; required when any rule
// pseudonymises. Null without a key.
Status ReadPseudonymKey(FileSystem* files, const ScreenPlan& p, const screen::RuleSet& rules, Settings* settings,
                        std::unique_ptr<screen::PseudonymKey>* key) {
  std::vector<std::string> pseudo_rules;
  for (const auto& r : rules.rules) {
    if (r.action == Action::kPseudonymise) pseudo_rules.push_back(r.id);
  }
  std::string key_bytes;
  if (!p.key_file.empty()) {
    auto read = ReadWholeFile(files, p.key_file);
    if (!read.ok()) return Status::Usage("stages.screen.key_file: cannot read " + p.key_file);
    key_bytes = std::move(read).value();
    while (!key_bytes.empty() && (key_bytes.back() == '\n' || key_bytes.back() == '\r')) key_bytes.pop_back();
    settings->key_source = "key_file";
  } else if (!p.key_env.empty()) {
    const char* v = std::getenv(p.key_env.c_str());
    if (!v || !*v) return Status::Usage("stages.screen.key_env: the environment variable " + p.key_env + " is not set or empty");
    key_bytes = v;
    settings->key_source = "key_env";
  }
  if (!settings->key_source.empty()) {
    auto k = screen::PseudonymKey::FromBytes(key_bytes);
    std::fill(key_bytes.begin(), key_bytes.end(), '\0');
    if (!k.ok()) return Status::Usage("stages.screen." + settings->key_source + ": the pseudonym key must be at least 16 bytes");
    *key = std::make_unique<screen::PseudonymKey>(std::move(k).value());
  } else if (!pseudo_rules.empty()) {
    std::string list;
    for (size_t i = 0; i < pseudo_rules.size() && i < 5; ++i) list += (i ? ", " : "") + pseudo_rules[i];
    if (pseudo_rules.size() > 5) list += ", ...";
    return Status::Usage("stages.screen: the action pseudonymise (rules " + list +
                 ") needs a secret key: set \"key_file\" (a file holding the key) or \"key_env\" (the name of an "
                 "environment variable holding it)");
  }
  return Status::Ok();
}

}  // namespace

std::unique_ptr<Stage> MakeScreenStage(const Plan& plan, FileSystem* fs, Status* error) {
  const Json& s = StageSettings(plan, kStage);
  FileSystem* files = fs;
  auto fail = [&](Status st) {
    *error = st.code() == StatusCode::kUsage ? st : Status::Usage(st.message());
    return nullptr;
  };
  std::string base_dir = plan.plan_path.empty() ? "" : fs::path(plan.plan_path).parent_path().string();
  ScreenPlan p;
  if (Status st = ParseScreenSettings(s, base_dir, &p); !st.ok()) return fail(st);
  if (Status st = ResolvePacks(files, base_dir, &p); !st.ok()) return fail(st);
  auto loaded = screen::LoadRulePacks(files, p.packs, p.rules_dir);
  if (!loaded.ok()) {
    *error = loaded.status().code() == StatusCode::kUsage ? loaded.status()
                                                          : Status::Usage(loaded.status().message());
    return nullptr;
  }
  screen::RuleSet rules = std::move(loaded).value();
  for (const auto& pack : p.packs) {
    auto bytes = ReadWholeFile(files, pack);
    p.settings.pack_paths.push_back(pack);
    p.settings.pack_labels.push_back(fs::path(pack).filename().string());
    p.settings.pack_digests.push_back(Sha256Hex(bytes.ok() ? bytes.value() : ""));
  }
  if (Status st = ApplyPlanActions(p, &rules); !st.ok()) return fail(st);
  std::unique_ptr<screen::PseudonymKey> key;
  if (Status st = ReadPseudonymKey(files, p, rules, &p.settings, &key); !st.ok()) return fail(st);
  screen::ScreenerOptions opts;
  opts.certainty_floor = p.settings.certainty_floor;
  auto built = screen::Screener::Build(rules, opts);
  if (!built.ok()) {
    *error = built.status();
    return nullptr;
  }
  return std::make_unique<PersonalDataStage>(std::move(p.settings), std::move(rules), std::move(built).value(),
                                             std::move(key));
}

}  // namespace prefsift

// Observed state (state files, docs/parts.md): every record's findings
// (place, span, rule, action and masked preview; never the text), the count
// of texts scanned and the first record that could not be scanned.
namespace prefsift {
namespace {

void PersonalDataStage::SaveObserved(StateWriter& out) const {
  out.U64(texts_.load());
  out.U8(error_record_ != SIZE_MAX);  // one thread after pass 1: no lock needed
  if (error_record_ != SIZE_MAX) {
    out.U64(error_record_);
    out.Str(error_.message());
  }
  out.U64(per_record_.size());
  for (size_t i = 0; i < per_record_.size(); ++i) {
    const RecordHits r = per_record_.Get(i);
    out.U8(static_cast<uint8_t>((r.drop ? 1 : 0) | (r.rewrite ? 2 : 0)));
    out.U64(r.hits.size());
    for (const Hit& h : r.hits) {
      out.U8(static_cast<uint8_t>(h.part));
      out.U8(static_cast<uint8_t>(h.action));
      out.U32(h.index);
      out.U32(h.rule);
      out.U32(h.begin);
      out.U32(h.end);
      out.F32(h.confidence);
      out.U64(h.text_hash);
      out.Str(h.meta_pointer);
      out.Str(h.preview);
    }
  }
}

Status PersonalDataStage::AppendObserved(StateReader& in, size_t first) {
  texts_.fetch_add(in.U64(), std::memory_order_relaxed);
  if (in.U8() != 0) {
    const uint64_t record = in.U64();
    std::string message = in.Str();
    if (in.ok()) NoteError(first + record, Status::Internal(std::move(message)));
  }
  const uint64_t n = in.Count(9);
  per_record_.resize(first + n);
  for (size_t i = first; i < first + n && in.ok(); ++i) {
    RecordHits r;
    const uint8_t flags = in.U8();
    r.drop = (flags & 1) != 0;
    r.rewrite = (flags & 2) != 0;
    r.hits.resize(in.Count(30));
    for (Hit& h : r.hits) {
      const uint8_t part = in.U8(), action = in.U8();
      if (part > static_cast<uint8_t>(Part::kMetadata) || action > static_cast<uint8_t>(Action::kDrop)) {
        in.Fail("a finding's field or action out of range");
      }
      h.part = static_cast<Part>(part);
      h.action = static_cast<Action>(action);
      h.index = in.U32();
      h.rule = in.U32();
      if (h.rule >= rules_.rules.size() && in.ok()) in.Fail("a finding of a rule this plan does not load");
      h.begin = in.U32();
      h.end = in.U32();
      h.confidence = in.F32();
      h.text_hash = in.U64();
      h.meta_pointer = in.Str();
      h.preview = in.Str();
    }
    if (r.hits.empty() && !r.drop && !r.rewrite) {
      per_record_.Reset(i);
    } else {
      per_record_.Set(i, r);
    }
  }
  return Status::Ok();
}

}  // namespace
}  // namespace prefsift

// Decided rewrites (decision files, docs/parts.md): the findings of every
// record the screen rewrites (masks, pseudonymises, or drops and masks).
namespace prefsift {
namespace {

void PersonalDataStage::SaveRewrites(StateWriter& out, size_t first, size_t count) const {
  std::vector<size_t> mine;
  for (size_t r = first; r < first + count && r < per_record_.size(); ++r) {
    if (per_record_.rewrite(r)) mine.push_back(r);
  }
  out.U64(mine.size());
  for (size_t r : mine) {
    out.U64(r - first);
    const RecordHits h = per_record_.Get(r);
    out.U8(h.drop);
    out.U64(h.hits.size());
    for (const Hit& hit : h.hits) {
      out.U8(static_cast<uint8_t>(hit.part));
      out.U8(static_cast<uint8_t>(hit.action));
      out.U32(hit.index);
      out.U32(hit.rule);
      out.U32(hit.begin);
      out.U32(hit.end);
      out.U64(hit.text_hash);
      out.Str(hit.meta_pointer);
    }
  }
}

Status PersonalDataStage::LoadRewrites(StateReader& in, size_t count) {
  per_record_.clear();
  per_record_.resize(count);
  const uint64_t n = in.Count(17);
  for (uint64_t k = 0; k < n && in.ok(); ++k) {
    const uint64_t r = in.U64();
    if (r >= count) {
      in.Fail("a record out of range");
      break;
    }
    RecordHits h;
    h.rewrite = true;
    h.drop = in.U8() != 0;
    h.hits.resize(in.Count(34));
    for (Hit& hit : h.hits) {
      const uint8_t part = in.U8(), action = in.U8();
      if (part > static_cast<uint8_t>(Part::kMetadata) || action > static_cast<uint8_t>(Action::kDrop)) {
        in.Fail("a finding's field or action out of range");
      }
      hit.part = static_cast<Part>(part);
      hit.action = static_cast<Action>(action);
      hit.index = in.U32();
      hit.rule = in.U32();
      if (hit.rule >= rules_.rules.size() && in.ok()) in.Fail("a finding of a rule this plan does not load");
      hit.begin = in.U32();
      hit.end = in.U32();
      hit.text_hash = in.U64();
      hit.meta_pointer = in.Str();
    }
    if (in.ok()) per_record_.Set(r, h);
  }
  return Status::Ok();
}

}  // namespace
}  // namespace prefsift
