// The datasheet; see datasheet.h and docs/datasheet.md.
#include "report/datasheet.h"

#include "report/annotator_facts.h"
#include "report/json_find.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

namespace prefsift {

using Json = nlohmann::ordered_json;

const char* const kPersonalDataCaution =
    "The personal-data screen is an aid, not a guarantee and not legal advice. It finds patterned data (e-mail "
    "addresses, phone numbers, card and account numbers, identifiers with checksums, network addresses, keys), and "
    "person names and postal addresses only where the text signals them (a self-introduction, greeting, sign-off or "
    "title; a street line or postcode in a known format), so it misses many of those. It does not find free-text "
    "mentions of health, religion, politics or other special categories. Whether this dataset may be used, shared or kept is for the applicable law and your privacy officer "
    "to decide.";

namespace {

struct Question {
  const char* key;
  const char* question;
};

struct Section {
  const char* key;
  const char* title;
  std::vector<Question> questions;
};

// The seven sections of Datasheets for Datasets (Gebru et al. 2018; CACM 2021)
// [V]; the questions are our own short wording of each section's themes.
const std::vector<Section>& Sections() {
  static const std::vector<Section> k = {
      {"motivation", "Motivation",
       {{"purpose", "For what purpose was the dataset created?"},
        {"creators", "Who created it, and on behalf of which entity?"},
        {"funding", "Who funded its creation?"}}},
      {"composition", "Composition",
       {{"instances", "What do the instances represent?"},
        {"sampling", "Is it a sample of a larger set? How was the sample drawn?"},
        {"confidential_data", "Does it hold confidential, sensitive or identifying data?"}}},
      {"collection", "Collection process",
       {{"how", "How was the data acquired?"},
        {"who", "Who collected and labelled it, and how were they paid?"},
        {"timeframe", "Over what timeframe was it collected?"},
        {"ethical_review", "Was there an ethical review?"},
        {"consent", "Did the people concerned consent, and how?"}}},
      {"preprocessing", "Preprocessing, cleaning and labelling",
       {{"raw_data_kept", "Was the raw data kept besides the cleaned data? Where?"},
        {"other_steps", "What other preprocessing happened outside this run?"}}},
      {"uses", "Uses",
       {{"used_for", "Has the dataset been used already? For what?"},
        {"other_tasks", "What other tasks could it be used for?"},
        {"future_use_risks", "Is there anything about its making that could affect future uses?"},
        {"avoid", "Are there tasks it should not be used for?"}}},
      {"distribution", "Distribution",
       {{"to_whom", "Will it be given to third parties?"},
        {"how", "How will it be distributed?"},
        {"when", "When?"},
        {"licence", "Under which licence or terms of use?"}}},
      {"maintenance", "Maintenance",
       {{"maintainer", "Who maintains it?"},
        {"contact", "How can the maintainer be reached?"},
        {"errata", "Is there an erratum?"},
        {"updates", "Will it be updated, how often and by whom?"},
        {"retention", "Are there limits on how long the data may be kept?"},
        {"old_versions", "Will older versions stay available?"},
        {"contributions", "Can others extend or contribute to it?"}}},
  };
  return k;
}



std::string Str(const Json& j) { return j.is_string() ? j.get<std::string>() : j.dump(); }

// Run facts for the composition section.
// A member of a summary section, or null when the section lacks it (a stage
// that did not run fully, e.g. leakage without evaluation sets, reports fewer
// keys; const operator[] on a missing key is undefined behaviour).
Json At(const Json& j, const char* key) { return j.is_object() && j.contains(key) ? j[key] : Json(nullptr); }

Json CompositionFacts(const Json& s) {
  Json f = Json::array();
  auto add = [&](const std::string& what, const Json& value) { f.push_back(Json{{"fact", what}, {"value", value}}); };
  if (const Json* l = FindPath(s, {"ledger"})) {
    add("records read (non-blank input lines)", At(*l, "records_in"));
    add("records kept", At(*l, "kept"));
    add("records rejected", At(*l, "rejected"));
  }
  if (const Json* ins = FindPath(s, {"inputs"}); ins && ins->is_array()) {
    for (const auto& in : *ins) {
      add("input " + Str(in["name"]) + ": records read / kept", Json::array({At(in, "records_in"), At(in, "kept")}));
    }
  }
  const Json* whole = FindPath(s, {"whole_store"});  // a summary over a whole store (docs/store.md)
  if (whole) {
    add("batches in the store", At(*whole, "batch_count"));
    add("store counts, summed over batches", At(*whole, "store_counts"));
  }
  const Json* c = FindPath(s, {"stages", "split", "composition"});
  if (!c && !whole) {
    add("composition of kept records", "not available: the split stage did not run");
    return f;
  }
  if (!c) {
    add("composition of kept records (candidates, judgments, lengths, sources, annotators)",
        "per batch only: see each batch's datasheet (the store keeps hashes, not text)");
  } else {
  add("candidates per record (B: records)", At(*c, "candidates_per_record"));
  add("judgment shapes", At(*c, "judgment_shapes"));
  add("chosen slot by number of candidates (counts per slot)", At(*c, "chosen_slot_by_candidates"));
  add("records whose top rank is tied", At(*c, "records_with_tied_top"));
  add("prompt length in code points", At(*c, "prompt_chars"));
  add("chosen answer length in code points", At(*c, "chosen_chars"));
  add("other answers' length in code points", At(*c, "rejected_chars"));
  add("sources (records)", At(*c, "sources"));
  add("annotators", At(*c, "annotators"));
  add("records with a thread id", At(*c, "records_with_thread"));
  add("prompt script (crude detection; records)", At(*c, "prompt_script")["records"]);
  }
  if (const Json* sp = FindPath(s, {"stages", "split", "splits"})) {
    Json t = Json::object();
    for (const auto& e : *sp) t[Str(e["name"])] = e["records"];
    add("recommended splits (records; group-aware, see Preprocessing)", t);
  }
  if (const Json* sc = FindPath(s, {"stages", "screen"})) {
    add("personal-data findings (all records, before actions)", At(*sc, "findings"));
    add("records with personal-data findings", At(*sc, "records_with_findings"));
    add("personal-data findings by action", At(*sc, "by_action"));
  } else if (whole) {
    add("personal-data findings", "per batch only: see each batch's summary.json stages.screen (the store keeps no "
                                  "text, so this summary cannot echo personal data)");
  } else {
    add("personal-data screen", "not run");
  }
  if (const Json* lk = FindPath(s, {"stages", "leakage"})) {
    add("records matching an evaluation set", At(*lk, "contaminated_records"));
  }
  if (whole) add("evaluation sets", At(*whole, "evaluation_sets"));
  if (const Json* nr = FindPath(s, {"stages", "near"})) {
    add("near-duplicate prompt clusters / records in them", Json::array({At(*nr, "clusters"), At(*nr, "records_in_clusters")}));
  }
  return f;
}

Json PreprocessingFacts(const Json& plan_stages, const Json& s) {
  Json stages = Json::array();
  const Json* ran = FindPath(s, {"stages"});
  if (ran && ran->is_object()) {
    for (auto it = ran->begin(); it != ran->end(); ++it) {
      Json e;
      e["stage"] = it.key();
      e["settings_in_plan"] = plan_stages.contains(it.key()) ? plan_stages[it.key()] : Json::object();
      if (it.value().contains("settings")) e["settings_used"] = it.value()["settings"];
      uint64_t rejected = 0;
      Json reasons = Json::object();
      if (const Json* rb = FindPath(s, {"rejects_by_stage"})) {
        for (const auto& r : *rb) {
          if (r["stage"] == it.key()) {
            rejected = r["rejected"].get<uint64_t>();
            reasons = r["by_reason"];
          }
        }
      }
      e["rejected"] = rejected;
      e["rejected_by_reason"] = reasons;
      e["details"] = std::string(FindPath(s, {"whole_store"}) ? "each batch's summary.json stages." : "summary.json stages.") +
                     it.key();
      stages.push_back(std::move(e));
    }
  }
  // Ingest rejects are not a stage section.
  if (const Json* rb = FindPath(s, {"rejects_by_stage"})) {
    for (const auto& r : *rb) {
      if (r["stage"] == "ingest") {
        stages.insert(stages.begin(), Json{{"stage", "ingest"}, {"settings_in_plan", Json::object()},
                                           {"rejected", r["rejected"]}, {"rejected_by_reason", r["by_reason"]},
                                           {"details", "summary.json inputs[].rejected_by_reason"}});
      }
    }
  }
  Json f;
  f["stages"] = std::move(stages);
  if (const Json* sp = FindPath(s, {"stages", "split"})) {
    f["splits"] = Json{{"tie_by", (*sp)["tie_by"]}, {"assignment", (*sp)["assignment"]}, {"splits", (*sp)["splits"]},
                       {"checks", (*sp)["checks"]}};
  } else {
    f["splits"] = "the split stage did not run: no recommended splits";
  }
  if (const Json* st = FindPath(s, {"settings"})) f["normalisation"] = (*st)["normalize"];
  f["software"] = "prefsift (see Provenance for version, revision and digests)";
  return f;
}

}  // namespace

Status ValidateProvenance(const Json& p) {
  if (!p.is_object()) return Status::Usage("plan: \"provenance\" must be an object (docs/datasheet.md)");
  for (auto it = p.begin(); it != p.end(); ++it) {
    if (it.key() == "$comment") continue;
    if (it.key() == "dataset_name") {
      if (!it.value().is_string()) return Status::Usage("provenance.dataset_name: must be a string");
      continue;
    }
    const Section* sec = nullptr;
    for (const auto& s : Sections()) {
      if (it.key() == s.key) sec = &s;
    }
    if (!sec) {
      return Status::Usage("provenance." + it.key() +
                           ": unknown key (known: dataset_name, motivation, composition, collection, preprocessing, "
                           "uses, distribution, maintenance)");
    }
    if (!it.value().is_object()) return Status::Usage("provenance." + it.key() + ": must be an object of answers");
    for (auto q = it.value().begin(); q != it.value().end(); ++q) {
      bool known = false;
      std::string names;
      for (const auto& qq : sec->questions) {
        known = known || q.key() == qq.key;
        names += std::string(names.empty() ? "" : ", ") + qq.key;
      }
      if (!known) return Status::Usage("provenance." + it.key() + "." + q.key() + ": unknown key (known: " + names + ")");
      if (!q.value().is_string()) return Status::Usage("provenance." + it.key() + "." + q.key() + ": must be a string");
    }
  }
  return Status::Ok();
}

Json BuildDatasheet(const Json& provenance, const Json& plan_stages, const Json& summary,
                    const std::string& summary_sha256) {
  Json d;
  d["dataset_name"] = provenance.contains("dataset_name") ? provenance["dataset_name"] : Json("not provided");
  d["about"] = "Datasheet organised by the seven sections of Datasheets for Datasets (Gebru et al., arXiv:1803.09010; "
               "Communications of the ACM 64(12), 2021). Answers marked \"from the plan\" were written by the dataset's "
               "owners in the plan's provenance object; \"from the run\" facts were measured by prefsift.";
  if (const Json* w = FindPath(summary, {"whole_store"})) d["scope"] = At(*w, "scope");
  d["gate"] = summary.contains("gate") ? summary["gate"] : Json("not evaluated");
  d["personal_data_caution"] = kPersonalDataCaution;
  Json sections = Json::array();
  int number = 0;
  for (const auto& sec : Sections()) {
    Json js;
    js["number"] = ++number;
    js["key"] = sec.key;
    js["title"] = sec.title;
    Json answers = Json::array();
    for (const auto& q : sec.questions) {
      const Json* a = FindPath(provenance, {sec.key, q.key});
      answers.push_back(Json{{"key", q.key},
                             {"question", q.question},
                             {"answer", a ? *a : Json("not provided")},
                             {"from", a ? "the plan" : "not provided"}});
    }
    js["answers"] = std::move(answers);
    if (std::string(sec.key) == "composition") js["from_the_run"] = CompositionFacts(summary);
    if (std::string(sec.key) == "preprocessing") js["from_the_run"] = PreprocessingFacts(plan_stages, summary);
    if (std::string(sec.key) == "collection") js["from_the_run"] = CollectionFacts(summary);  // annotator_facts.h
    sections.push_back(std::move(js));
  }
  d["sections"] = std::move(sections);
  Json prov = summary.contains("provenance") ? summary["provenance"] : Json::object();
  prov["summary_json_sha256"] = summary_sha256;
  d["provenance"] = std::move(prov);
  return d;
}

namespace {

std::string Number(double v) {
  char b[48];
  if (v == std::floor(v) && std::fabs(v) < 1e15) {
    std::snprintf(b, sizeof b, "%.0f", std::fabs(v));
    std::string s = b, o;
    for (size_t i = 0; i < s.size(); ++i) {
      if (i && (s.size() - i) % 3 == 0) o += ',';
      o += s[i];
    }
    return (v < 0 ? "-" : "") + o;
  }
  if (v != 0 && std::fabs(v) < 0.001) std::snprintf(b, sizeof b, "%.3g", v);
  else std::snprintf(b, sizeof b, "%.4g", v);
  return b;
}

// Any value as prose, never raw JSON: numbers with separators, arrays of
// scalars joined with " / ", objects as "key: value" pairs (nested keys dotted).
std::string Prose(const Json& v, const std::string& prefix = "") {
  if (v.is_null()) return "none";
  if (v.is_boolean()) return v.get<bool>() ? "yes" : "no";
  if (v.is_number()) return Number(v.get<double>());
  if (v.is_string()) return v.get<std::string>();
  std::string o;
  if (v.is_array()) {
    bool scalars = true;
    for (const auto& e : v) scalars = scalars && !e.is_structured();
    for (const auto& e : v) o += (o.empty() ? "" : scalars ? " / " : "; ") + (scalars ? Prose(e) : "(" + Prose(e) + ")");
    return o.empty() ? "none" : o;
  }
  for (auto it = v.begin(); it != v.end(); ++it) {
    if (it.value().is_object() && !it.value().empty()) {
      o += (o.empty() ? "" : "; ") + Prose(it.value(), prefix + it.key() + ".");
    } else {
      o += (o.empty() ? "" : "; ") + prefix + it.key() + ": " + Prose(it.value());
    }
  }
  return o.empty() ? "none" : o;
}

// A table cell: prose with pipes escaped and line breaks folded.
std::string Cell(const Json& v) {
  std::string s = Prose(v), out;
  for (char c : s) {
    if (c == '|') out += "\\|";
    else if (c == '\n') out += ' ';
    else out += c;
  }
  return out;
}

// An array of objects as a Markdown table (columns: the union of keys).
std::string ObjectTable(const Json& arr) {
  std::vector<std::string> keys;
  for (const auto& e : arr) {
    if (!e.is_object()) continue;
    for (auto it = e.begin(); it != e.end(); ++it) {
      if (std::find(keys.begin(), keys.end(), it.key()) == keys.end()) keys.push_back(it.key());
    }
  }
  if (keys.empty()) return Cell(arr) + "\n";
  std::string m = "|";
  for (const auto& k : keys) m += " " + k + " |";
  m += "\n|";
  for (size_t i = 0; i < keys.size(); ++i) m += "---|";
  m += "\n";
  for (const auto& e : arr) {
    m += "|";
    for (const auto& k : keys) m += " " + (e.is_object() && e.contains(k) ? Cell(e[k]) : std::string()) + " |";
    m += "\n";
  }
  return m;
}

std::string GateTable(const Json& g) {
  std::string m;
  if (!g.is_object()) return "**Gate verdict: " + Cell(g) + "**\n\n";
  m += "**Gate verdict: " + Cell(At(g, "verdict")) + "**";
  if (g.contains("failed")) {
    m += " (" + Cell(At(g, "passed")) + " passed, " + Cell(At(g, "failed")) + " failed, " + Cell(At(g, "not_evaluated")) +
         " not evaluated)";
  }
  m += ".\n\n";
  if (g.contains("checks") && g["checks"].is_array() && !g["checks"].empty()) {
    m += "| check | scope | value | threshold | verdict |\n|---|---|---|---|---|\n";
    for (const auto& c : g["checks"]) {
      const Json value = At(c, "value");
      std::string v = value.is_null() ? "not evaluated: " + Cell(At(c, "reason"))
                      : At(c, "threshold").is_boolean() && value.is_number() ? (value.get<double>() != 0 ? "yes" : "no")
                                                                             : Cell(value);
      m += "| " + Cell(At(c, "check")) + " | " + (c.contains("scope") ? Cell(c["scope"]) : "") + " | " + v + " | " +
           Cell(At(c, "threshold")) + " | " + Cell(At(c, "verdict")) + " |\n";
    }
    m += "\n";
  }
  if (g.contains("note")) m += "Gate note: " + Cell(g["note"]) + ".\n\n";
  return m;
}

}  // namespace

std::string DatasheetMarkdown(const Json& d) {
  std::string m;
  m += "# Datasheet: " + Cell(d["dataset_name"]) + "\n\n";
  m += Cell(d["about"]) + "\n\n";
  if (d.contains("scope")) m += "**Scope:** " + Cell(d["scope"]) + "\n\n";
  const Json& p = d["provenance"];
  if (p.contains("tool")) {
    const Json t = At(p, "time");
    m += "Written by prefsift " + Cell(p["tool"]["version"]) + " (revision " + Cell(p["tool"]["revision"]) + "), dated " +
         Cell(At(t, "utc")) + " (" + Cell(At(t, "source")) + ")";
    if (t.contains("duration_seconds")) m += "; the run took " + Cell(t["duration_seconds"]) + " s";
    m += ".\n\n";
  }
  m += GateTable(d["gate"]);
  m += "> **Personal data.** " + Cell(d["personal_data_caution"]) + "\n\n";
  for (const auto& sec : d["sections"]) {
    m += "## " + Cell(sec["number"]) + ". " + Cell(sec["title"]) + "\n\n";
    for (const auto& a : sec["answers"]) {
      m += "- **" + Cell(a["question"]) + "** " + (a["from"] == "the plan" ? Cell(a["answer"]) : "_not provided_") + "\n";
    }
    m += "\n";
    if (sec.contains("from_the_run")) {
      const Json& f = sec["from_the_run"];
      m += "From the run:\n\n";
      if (f.is_array()) {
        m += "| fact | value |\n|---|---|\n";
        for (const auto& e : f) m += "| " + Cell(e["fact"]) + " | " + Cell(e["value"]) + " |\n";
      } else {
        m += "| stage | settings in the plan | rejected | by reason |\n|---|---|---|---|\n";
        for (const auto& e : f["stages"]) {
          m += "| " + Cell(e["stage"]) + " | " + Cell(e["settings_in_plan"]) + " | " + Cell(e["rejected"]) + " | " +
               Cell(e["rejected_by_reason"]) + " |\n";
        }
        const Json sp = At(f, "splits");
        if (sp.is_object()) {
          m += "\nSplits (records tied by " + Cell(At(sp, "tie_by")) + "; " + Cell(At(sp, "assignment")) + "):\n\n";
          if (At(sp, "splits").is_array()) m += ObjectTable(sp["splits"]);
          if (At(sp, "checks").is_object()) {
            m += "\nSplit checks:\n\n| check | value |\n|---|---|\n";
            for (auto it = sp["checks"].begin(); it != sp["checks"].end(); ++it) {
              m += "| " + it.key() + " | " + Cell(it.value()) + " |\n";
            }
          }
        } else {
          m += "\nSplits: " + Cell(sp) + "\n";
        }
        if (f.contains("normalisation")) m += "\nText normalisation: " + Cell(f["normalisation"]) + "\n";
      }
      m += "\n";
    }
  }
  m += "## Provenance\n\n";
  m += "| item | value |\n|---|---|\n";
  for (const char* k : {"store", "store_content_sha256", "plan_sha256", "seed", "summary_json_sha256"}) {
    if (p.contains(k)) m += std::string("| ") + k + " | " + Cell(p[k]) + " |\n";
  }
  if (p.contains("rule_packs") && !p["rule_packs"].is_array()) m += "| rule packs | " + Cell(p["rule_packs"]) + " |\n";
  if (p.contains("rule_packs") && p["rule_packs"].is_array()) m += "\nRule packs:\n\n" + ObjectTable(p["rule_packs"]);
  m += "\n| file | bytes | SHA-256 |\n|---|---|---|\n";
  if (p.contains("inputs")) {
    for (const auto& f : p["inputs"]) m += "| input: " + Cell(f["path"]) + " | " + Cell(f["bytes"]) + " | " + Cell(f["sha256"]) + " |\n";
  }
  if (p.contains("outputs")) {
    for (const auto& f : p["outputs"]) m += "| output: " + Cell(f["file"]) + " | " + Cell(f["bytes"]) + " | " + Cell(f["sha256"]) + " |\n";
  }
  if (p.contains("summary_json_sha256")) {
    m += "| output: " + (p.contains("summary_file") ? Cell(p["summary_file"]) : std::string("summary.json")) + " | | " +
         Cell(p["summary_json_sha256"]) + " |\n";
  }
  m += "\n";
  if (p.contains("batches")) {
    // A whole store: one row per batch with its digests (docs/store.md).
    m += "| batch | added at | plan SHA-256 | input (SHA-256) | evaluation sets (SHA-256) |\n|---|---|---|---|---|\n";
    for (const auto& b : p["batches"]) {
      std::string ins, evs;
      for (const auto& in : At(b, "inputs")) ins += (ins.empty() ? "" : "; ") + Cell(At(in, "name")) + " " + Cell(At(in, "sha256"));
      for (const auto& ev : At(b, "eval_sets")) evs += (evs.empty() ? "" : "; ") + Cell(At(ev, "name")) + " " + Cell(At(ev, "sha256"));
      m += "| " + Cell(At(b, "batch")) + " | " + Cell(At(b, "added_at")) + " | " + Cell(At(b, "plan_sha256")) + " | " + ins +
           " | " + (evs.empty() ? "none" : evs) + " |\n";
    }
    m += "\n";
  }
  return m;
}

}  // namespace prefsift
