#include "core/layout.h"

#include <nlohmann/json.hpp>

#include <map>

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

// Built-in presets. Names and field choices are our own.
const std::map<std::string, Json>& Presets() {
  static const std::map<std::string, Json> kPresets = {
      {"pairwise", Json{{"id", "/id"}, {"prompt", "/prompt"}, {"chosen", "/chosen"}, {"rejected", "/rejected"}}},
      {"choice", Json{{"id", "/id"}, {"prompt", "/prompt"}, {"candidates", "/candidates"}, {"choice", "/choice"}}},
      {"ranked", Json{{"id", "/id"}, {"prompt", "/prompt"}, {"candidates", "/candidates"}, {"ranks", "/ranks"}}},
      {"ordered", Json{{"id", "/id"}, {"prompt", "/prompt"}, {"candidates", "/candidates"}, {"order", "/order"}}},
  };
  return kPresets;
}

const char* kKnownKeys[] = {"preset", "id", "prompt", "turn_role", "turn_text", "candidates", "candidate_text",
                            "candidate_origin", "chosen", "rejected", "choice", "choice_base", "ranks", "order",
                            "annotator", "thread", "source", "timestamp", "group", "metadata", "rank_base",
                            "user_roles", "system_roles"};

}  // namespace

const char* JudgmentShapeName(JudgmentShape s) {
  switch (s) {
    case JudgmentShape::kChoice: return "choice";
    case JudgmentShape::kRanks: return "ranks";
    case JudgmentShape::kOrder: return "order";
    case JudgmentShape::kPairwise: return "pairwise";
  }
  return "?";
}

const std::vector<std::string>& DefaultUserRoles() {
  // The words chat exports commonly use for the person asking (our own list).
  static const std::vector<std::string> k = {"user", "human", "customer", "client", "member", "person",
                                             "patient", "student", "caller", "visitor", "requester", "asker",
                                             "questioner", "prompter", "guest", "player"};
  return k;
}

const std::vector<std::string>& DefaultSystemRoles() {
  static const std::vector<std::string> k = {"system", "developer", "instruction", "instructions", "context",
                                             "preamble", "system_prompt"};
  return k;
}

std::vector<std::string> LayoutPresetNames() {
  std::vector<std::string> names;
  for (const auto& [k, v] : Presets()) names.push_back(k);
  return names;
}

namespace {

// The layout's keys: the preset's, with the user's on top (judgment keys in
// the user's spec replace the preset's judgment entirely). Unknown keys are
// errors.
Status MergedSpec(const Json& spec_in, const std::string& where, Json* spec, std::string* preset) {
  if (spec_in.contains("preset")) {
    if (!spec_in["preset"].is_string()) return Status::Usage(where + ".preset: must be a string");
    *preset = spec_in["preset"].get<std::string>();
    auto it = Presets().find(*preset);
    if (it == Presets().end()) {
      std::string names;
      for (const auto& n : LayoutPresetNames()) names += (names.empty() ? "" : ", ") + n;
      return Status::Usage(where + ".preset: unknown preset \"" + *preset + "\" (known: " + names + ")");
    }
    *spec = it->second;
  }
  bool user_judgment = spec_in.contains("choice") || spec_in.contains("ranks") || spec_in.contains("order") ||
                       spec_in.contains("chosen") || spec_in.contains("rejected");
  if (user_judgment) {
    for (const char* k : {"choice", "ranks", "order", "chosen", "rejected"}) spec->erase(k);
    if (!spec_in.contains("candidates") && (spec_in.contains("chosen") || spec_in.contains("rejected"))) {
      spec->erase("candidates");
    }
  }
  for (auto it = spec_in.begin(); it != spec_in.end(); ++it) {
    bool known = false;
    for (const char* k : kKnownKeys) known = known || it.key() == k;
    if (!known) return Status::Usage(where + ": unknown layout key \"" + it.key() + "\"");
    if (it.key() != "preset") (*spec)[it.key()] = it.value();
  }
  return Status::Ok();
}

// choice_base / rank_base, and the user and system role names.
Status ReadBasesAndRoles(const Json& spec, const std::string& where, Layout* l) {
  for (const char* key : {"choice_base", "rank_base"}) {
    if (!spec.contains(key)) continue;
    const auto& b = spec[key];
    if (!b.is_number_integer() || (b.get<int>() != 0 && b.get<int>() != 1)) {
      return Status::Usage(where + "." + key + ": must be 0 or 1");
    }
    (std::string(key) == "choice_base" ? l->choice_base : l->rank_base) = b.get<int>();
    l->base_given = true;
  }
  l->user_roles = DefaultUserRoles();
  l->system_roles = DefaultSystemRoles();
  for (auto [key, out] : {std::pair{"user_roles", &l->user_roles}, std::pair{"system_roles", &l->system_roles}}) {
    if (!spec.contains(key)) continue;
    const auto& v = spec[key];
    if (!v.is_array() || v.empty()) return Status::Usage(where + "." + key + ": must be a non-empty array of role names");
    out->clear();
    for (const auto& r : v) {
      if (!r.is_string() || r.get<std::string>().empty()) {
        return Status::Usage(where + "." + key + ": every entry must be a non-empty string");
      }
      std::string lower = r.get<std::string>();
      for (auto& c : lower) c = static_cast<char>(c >= 'A' && c <= 'Z' ? c - 'A' + 'a' : c);
      out->push_back(lower);
    }
  }
  return Status::Ok();
}

}  // namespace

Result<Layout> LayoutFromJson(const Json& spec_in, const std::string& where) {
  if (!spec_in.is_object()) return Status::Usage(where + ": a layout must be a JSON object");
  Json spec = Json::object();
  std::string preset = "custom";
  if (Status s = MergedSpec(spec_in, where, &spec, &preset); !s.ok()) return s;

  Layout l;
  l.preset = preset;
  auto ptr = [&](const char* key, JsonPointer* out, bool* has) -> Status {
    if (!spec.contains(key) || spec[key].is_null()) {
      if (has) *has = false;
      return Status::Ok();
    }
    if (!spec[key].is_string()) return Status::Usage(where + "." + key + ": must be a JSON Pointer string");
    auto p = ParseJsonPointer(spec[key].get<std::string>(), where + "." + key);
    if (!p.ok()) return p.status();
    *out = p.value();
    if (has) *has = true;
    return Status::Ok();
  };
  bool has_prompt = false, has_cands = false, has_chosen = false, has_rejected = false, has_choice = false,
       has_ranks = false, has_order = false, has_tr = false, has_tt = false, has_ct = false;
  JsonPointer ranks, order;
  for (auto [key, out, has] : std::initializer_list<std::tuple<const char*, JsonPointer*, bool*>>{
           {"id", &l.id, &l.has_id}, {"prompt", &l.prompt, &has_prompt}, {"turn_role", &l.turn_role, &has_tr},
           {"turn_text", &l.turn_text, &has_tt}, {"candidates", &l.candidates, &has_cands},
           {"candidate_text", &l.candidate_text, &has_ct}, {"candidate_origin", &l.candidate_origin, &l.has_candidate_origin},
           {"chosen", &l.chosen, &has_chosen}, {"rejected", &l.rejected, &has_rejected},
           {"choice", &l.choice, &has_choice}, {"ranks", &ranks, &has_ranks}, {"order", &order, &has_order},
           {"annotator", &l.annotator, &l.has_annotator}, {"thread", &l.thread, &l.has_thread},
           {"source", &l.source, &l.has_source}, {"timestamp", &l.timestamp, &l.has_timestamp},
           {"group", &l.group, &l.has_group}, {"metadata", &l.metadata, &l.has_metadata}}) {
    Status s = ptr(key, out, has);
    if (!s.ok()) return s;
  }
  if (!has_tr) l.turn_role = ParseJsonPointer("/role", "turn_role").value();
  if (!has_tt) l.turn_text = ParseJsonPointer("/content", "turn_text").value();
  if (!has_prompt) return Status::Usage(where + ": the layout needs \"prompt\" (a JSON Pointer to the prompt)");
  if (!has_prompt || l.prompt.empty()) {
    return Status::Usage(where + ".prompt: must point inside the record, not at the whole record");
  }
  int shapes = int(has_choice) + int(has_ranks) + int(has_order) + int(has_chosen || has_rejected);
  if (shapes != 1) {
    return Status::Usage(where + ": give exactly one judgment: \"choice\", \"ranks\", \"order\", or \"chosen\" with "
                         "\"rejected\" (found " + std::to_string(shapes) + ")");
  }
  if (has_chosen || has_rejected) {
    if (!(has_chosen && has_rejected)) return Status::Usage(where + ": pairwise layouts need both \"chosen\" and \"rejected\"");
    if (has_cands) return Status::Usage(where + ": a pairwise layout (chosen/rejected) has no \"candidates\"");
    l.judgment = JudgmentShape::kPairwise;
  } else {
    if (!has_cands) return Status::Usage(where + ": the layout needs \"candidates\" (a JSON Pointer to the array of answers)");
    if (has_choice) l.judgment = JudgmentShape::kChoice;
    if (has_ranks) { l.judgment = JudgmentShape::kRanks; l.ranking = ranks; }
    if (has_order) { l.judgment = JudgmentShape::kOrder; l.ranking = order; }
  }
  l.id_required = l.has_id && spec_in.contains("id") && !spec_in["id"].is_null();
  if (Status s = ReadBasesAndRoles(spec, where, &l); !s.ok()) return s;
  return l;
}

void LayoutToJson(const Layout& l, Json* out) {
  Json j;
  j["preset"] = l.preset;
  auto put = [&](const char* k, const JsonPointer& p, bool has) {
    if (has) j[k] = p.text;
  };
  put("id", l.id, l.has_id);
  j["prompt"] = l.prompt.text;
  j["turn_role"] = l.turn_role.text;
  j["turn_text"] = l.turn_text.text;
  if (l.judgment == JudgmentShape::kPairwise) {
    j["chosen"] = l.chosen.text;
    j["rejected"] = l.rejected.text;
  } else {
    j["candidates"] = l.candidates.text;
    j["candidate_text"] = l.candidate_text.text;
    put("candidate_origin", l.candidate_origin, l.has_candidate_origin);
    if (l.judgment == JudgmentShape::kChoice) {
      j["choice"] = l.choice.text;
      if (l.base_given) j["choice_base"] = l.choice_base;
    } else {
      j[l.judgment == JudgmentShape::kRanks ? "ranks" : "order"] = l.ranking.text;
      if (l.base_given) j[l.judgment == JudgmentShape::kRanks ? "rank_base" : "choice_base"] =
          l.judgment == JudgmentShape::kRanks ? l.rank_base : l.choice_base;
    }
  }
  put("annotator", l.annotator, l.has_annotator);
  put("thread", l.thread, l.has_thread);
  put("source", l.source, l.has_source);
  put("timestamp", l.timestamp, l.has_timestamp);
  put("group", l.group, l.has_group);
  put("metadata", l.metadata, l.has_metadata);
  if (l.user_roles != DefaultUserRoles()) j["user_roles"] = l.user_roles;
  if (l.system_roles != DefaultSystemRoles()) j["system_roles"] = l.system_roles;
  *out = std::move(j);
}

}  // namespace prefsift
