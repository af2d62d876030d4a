#include "core/plan.h"

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <set>
#include <sstream>
#include <utility>
#include <vector>

#include "core/limits.h"
#include "core/sha256.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

std::string Resolve(const std::string& base, const std::string& p) { return ResolvePlanPath(base, p); }

std::string Stem(const std::string& path) {
  std::string name = std::filesystem::path(path).filename().string();
  for (const char* ext : {".gz", ".zst", ".jsonl", ".json", ".ndjson", ".txt"}) {
    std::string e(ext);
    if (name.size() > e.size() && name.compare(name.size() - e.size(), e.size(), e) == 0) {
      name.resize(name.size() - e.size());
    }
  }
  return name;
}

// Nesting depth of a JSON value, without recursion.
size_t Depth(const Json& root) {
  size_t max_depth = 0;
  std::vector<std::pair<const Json*, size_t>> stack = {{&root, 1}};
  while (!stack.empty()) {
    auto [v, d] = stack.back();
    stack.pop_back();
    if (!v->is_structured()) continue;
    max_depth = std::max(max_depth, d);
    if (d > kMaxPlanDepth) break;
    for (const auto& child : *v) stack.push_back({&child, d + 1});
  }
  return max_depth;
}

}  // namespace

Status LimitsFromJson(const Json& j, const std::string& where, InputLimits* lim) {
  if (!j.is_object()) return Status::Usage(where + ": must be an object");
  for (auto it = j.begin(); it != j.end(); ++it) {
    if (it.key() == "max_reject_share") {
      if (!it.value().is_number() || it.value().get<double>() <= 0 || it.value().get<double>() > 1) {
        return Status::Usage(where + ".max_reject_share: must be a number above 0 and at most 1 (1 = never stop)");
      }
      lim->max_reject_share = it.value().get<double>();
      continue;
    }
    size_t* target = nullptr;
    if (it.key() == "max_line_bytes") target = &lim->max_line_bytes;
    else if (it.key() == "max_depth") target = &lim->max_depth;
    else if (it.key() == "max_candidates") target = &lim->max_candidates;
    else if (it.key() == "max_text_bytes") target = &lim->max_text_bytes;
    else return Status::Usage(where + ": unknown limit \"" + it.key() + "\"");
    if (!it.value().is_number_unsigned() || it.value().get<uint64_t>() == 0) {
      return Status::Usage(where + "." + it.key() + ": must be a positive integer");
    }
    *target = it.value().get<size_t>();
  }
  if (lim->max_candidates < 2) return Status::Usage(where + ".max_candidates: must be at least 2");
  if (lim->max_depth > kMaxDepthCeiling) {
    return Status::Usage(where + ".max_depth: at most " + std::to_string(kMaxDepthCeiling));
  }
  return Status::Ok();
}

Status AddInput(Plan* plan, const std::string& path, const Json& layout_spec, const std::string& where) {
  auto layout = LayoutFromJson(layout_spec, where + ".layout");
  if (!layout.ok()) return layout.status();
  InputSpec in;
  in.path = path;
  in.name = Stem(path);
  in.layout = layout.value();
  Json lj;
  LayoutToJson(in.layout, &lj);
  lj.erase("preset");
  in.layout_key = lj.dump();
  plan->inputs.push_back(std::move(in));
  return Status::Ok();
}

Result<Plan> PlanFromJson(const Json& j, const std::string& base_dir, const std::string& where) {
  if (!j.is_object()) return Status::Usage(where + ": a plan is a JSON object");
  if (Depth(j) > kMaxPlanDepth) {
    return Status::Usage(where + ": the plan is nested deeper than " + std::to_string(kMaxPlanDepth) + " levels");
  }
  static const std::set<std::string> kKeys = {"inputs", "layouts", "output", "overwrite", "strict", "seed", "threads",
                                              "limits", "normalize", "stages", "provenance", "gate", "store", "$comment"};
  for (auto it = j.begin(); it != j.end(); ++it) {
    if (!kKeys.count(it.key())) return Status::Usage(where + ": unknown key \"" + it.key() + "\"");
  }
  Plan plan;
  Json layouts = j.value("layouts", Json::object());
  if (j.contains("inputs")) {
    if (!j["inputs"].is_array()) return Status::Usage(where + ".inputs: must be an array");
    std::set<std::string> names;
    for (size_t i = 0; i < j["inputs"].size(); ++i) {
      const Json& in = j["inputs"][i];
      std::string w = where + ".inputs[" + std::to_string(i) + "]";
      if (!in.is_object() || !in.contains("path") || !in["path"].is_string()) {
        return Status::Usage(w + ": each input is an object with a \"path\" string");
      }
      for (auto it = in.begin(); it != in.end(); ++it) {
        if (it.key() != "path" && it.key() != "name" && it.key() != "layout") {
          return Status::Usage(w + ": unknown key \"" + it.key() + "\" (known: path, name, layout)");
        }
      }
      Json spec = in.value("layout", Json::object());
      if (spec.is_string()) {
        std::string ref = spec.get<std::string>();
        if (layouts.contains(ref)) spec = layouts[ref];
        else spec = Json{{"preset", ref}};
      }
      Status s = AddInput(&plan, Resolve(base_dir, in["path"].get<std::string>()), spec, w);
      if (!s.ok()) return s;
      if (in.contains("name")) {
        if (!in["name"].is_string() || in["name"].get<std::string>().empty()) {
          return Status::Usage(w + ".name: must be a non-empty string");
        }
        plan.inputs.back().name = in["name"].get<std::string>();
      }
      if (!names.insert(plan.inputs.back().name).second) {
        return Status::Usage(w + ": two inputs are named \"" + plan.inputs.back().name + "\"; give each a distinct \"name\"");
      }
    }
  }
  if (j.contains("output")) {
    if (!j["output"].is_string()) return Status::Usage(where + ".output: must be a string");
    plan.output = Resolve(base_dir, j["output"].get<std::string>());
  }
  auto boolean = [&](const char* k, bool* out) -> Status {
    if (!j.contains(k)) return Status::Ok();
    if (!j[k].is_boolean()) return Status::Usage(where + "." + k + ": must be true or false");
    *out = j[k].get<bool>();
    return Status::Ok();
  };
  if (Status s = boolean("overwrite", &plan.overwrite); !s.ok()) return s;
  if (Status s = boolean("strict", &plan.strict); !s.ok()) return s;
  if (j.contains("seed")) {
    if (!j["seed"].is_number_unsigned()) return Status::Usage(where + ".seed: must be a non-negative integer");
    plan.seed = j["seed"].get<uint64_t>();
  }
  if (j.contains("threads")) {
    if (!j["threads"].is_number_unsigned()) return Status::Usage(where + ".threads: must be a non-negative integer");
    plan.threads = j["threads"].get<unsigned>();
  }
  if (j.contains("limits")) {
    if (Status s = LimitsFromJson(j["limits"], where + ".limits", &plan.limits); !s.ok()) return s;
  }
  if (j.contains("normalize")) {
    const Json& n = j["normalize"];
    if (!n.is_object()) return Status::Usage(where + ".normalize: must be an object");
    for (auto it = n.begin(); it != n.end(); ++it) {
      if (it.key() != "strip_punctuation" || !it.value().is_boolean()) {
        return Status::Usage(where + ".normalize: the only key is \"strip_punctuation\" (true or false)");
      }
      plan.normalize.strip_punctuation = it.value().get<bool>();
    }
  }
  if (j.contains("stages")) {
    if (!j["stages"].is_object()) return Status::Usage(where + ".stages: must be an object");
    plan.stages = j["stages"];
  }
  if (j.contains("provenance")) plan.provenance = j["provenance"];
  if (j.contains("gate")) {
    plan.gate = j["gate"];
    plan.gate_given = true;
  }
  return plan;
}

Result<Plan> LoadPlanFile(const std::string& path) {
  std::ifstream f(path, std::ios::binary);
  if (!f) return Status::Usage("cannot read the plan file " + path);
  std::stringstream ss;
  ss << f.rdbuf();
  std::string text = ss.str();
  Json j;
  try {
    j = Json::parse(text, nullptr, true, /*ignore_comments=*/true);
  } catch (const nlohmann::json::parse_error& e) {
    // e.byte is the 1-based offset of the error; turn it into line:column.
    size_t line = 1, col = 1;
    for (size_t i = 0; i + 1 < e.byte && i < text.size(); ++i) {
      if (text[i] == '\n') { ++line; col = 1; } else { ++col; }
    }
    return Status::Usage(path + ":" + std::to_string(line) + ":" + std::to_string(col) +
                         ": the plan is not valid JSON (" + e.what() + ")");
  } catch (const nlohmann::json::exception& e) {
    // Not a syntax error but still unreadable, e.g. a number too large for a
    // double (out_of_range.406).
    return Status::Usage(path + ": the plan is not valid JSON (" + e.what() + ")");
  }
  std::string base = std::filesystem::path(path).parent_path().string();
  auto plan = PlanFromJson(j, base, path);
  if (!plan.ok()) return plan.status();
  plan.value().plan_path = path;
  plan.value().plan_digest = Sha256Hex(text);
  return plan;
}

std::string ResolvePlanPath(const std::string& base, const std::string& p) {
  if (p.empty() || p[0] == '/' || base.empty()) return p;
  return (std::filesystem::path(base) / p).lexically_normal().string();
}

const Json& StageSettings(const Plan& plan, const std::string& stage) {
  static const Json kEmpty = Json::object();
  if (plan.stages.contains(stage)) return plan.stages[stage];
  return kEmpty;
}

}  // namespace prefsift
