#include "core/plan.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cctype>
#include <cstring>
#include <filesystem>
#include <set>
#include <utility>
#include <vector>

#include "core/file_system.h"
#include "core/limits.h"
#include "core/sha256.h"

namespace prefsift {

namespace {
void DeleteJson(nlohmann::ordered_json* j) { delete j; }
}  // namespace

JsonSection::JsonSection() : value_(new nlohmann::ordered_json(nlohmann::ordered_json::object()), DeleteJson) {}
JsonSection::JsonSection(const JsonSection& other) : value_(new nlohmann::ordered_json(*other.value_), DeleteJson) {}
JsonSection::JsonSection(JsonSection&& other) noexcept : JsonSection() { value_.swap(other.value_); }
JsonSection& JsonSection::operator=(const JsonSection& other) {
  *value_ = *other.value_;
  return *this;
}
JsonSection& JsonSection::operator=(JsonSection&& other) noexcept {
  value_.swap(other.value_);
  return *this;
}
JsonSection& JsonSection::operator=(const nlohmann::ordered_json& value) {
  *value_ = value;
  return *this;
}
JsonSection::~JsonSection() = default;

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
    if (!kKeys.count(it.key())) {
      return Status::Usage(where + "." + it.key() +
                           ": unknown key (known: inputs, layouts, output, overwrite, strict, seed, threads, limits, "
                           "normalize, stages, provenance, gate, store)");
    }
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
          return Status::Usage(w + "." + it.key() + ": unknown key (known: path, name, layout)");
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

namespace {

// Line and column (1-based) of a byte offset.
std::string LineColumn(const std::string& text, size_t offset) {
  size_t line = 1, col = 1;
  for (size_t i = 0; i < offset && i < text.size(); ++i) {
    if (text[i] == '\n') {
      ++line;
      col = 1;
    } else if ((static_cast<unsigned char>(text[i]) & 0xC0) != 0x80) {
      ++col;  // count code points, not bytes
    }
  }
  return std::to_string(line) + ":" + std::to_string(col);
}

// The byte offset of a key path ("inputs[0].layout", "stages.near") in a plan
// text (JSON with comments): the key of an object member, the start of an
// array element. npos when absent or when the text cannot be scanned.
size_t FindKeyPath(const std::string& t, const std::string& target) {
  struct Level {
    bool array;
    size_t index;
    std::string key;  // object: the current member's key
    std::string path;
  };
  std::vector<Level> stack;
  size_t i = 0;
  auto skip = [&] {
    for (;;) {
      while (i < t.size() && std::isspace(static_cast<unsigned char>(t[i]))) ++i;
      if (t.compare(i, 2, "//") == 0) {
        while (i < t.size() && t[i] != '\n') ++i;
      } else if (t.compare(i, 2, "/*") == 0) {
        size_t e = t.find("*/", i + 2);
        i = e == std::string::npos ? t.size() : e + 2;
      } else {
        return;
      }
    }
  };
  auto read_string = [&]() -> std::string {  // at '"'; returns the raw content
    size_t from = ++i;
    while (i < t.size() && t[i] != '"') i += t[i] == '\\' ? 2 : 1;
    return t.substr(from, std::min(i++, t.size()) - from);
  };
  auto child_path = [&](const Level& l) {
    if (l.array) return l.path + "[" + std::to_string(l.index) + "]";
    return l.path.empty() ? l.key : l.path + "." + l.key;
  };
  bool expect_key = false;
  while (true) {
    skip();
    if (i >= t.size()) return std::string::npos;
    char c = t[i];
    if (expect_key) {
      if (c == '}') {
        expect_key = false;
        continue;
      }
      if (c != '"') return std::string::npos;
      size_t at = i;
      stack.back().key = read_string();
      if (child_path(stack.back()) == target) return at;
      skip();
      if (i >= t.size() || t[i] != ':') return std::string::npos;
      ++i;
      expect_key = false;
      continue;
    }
    if (c == '}' || c == ']') {
      stack.pop_back();
      ++i;
    } else if (c == ',') {
      ++i;
      if (stack.empty()) return std::string::npos;
      if (stack.back().array) {
        ++stack.back().index;
        if (child_path(stack.back()) == target) {
          skip();
          return i;
        }
      } else {
        expect_key = true;
      }
      continue;
    } else {
      // A value starts here.
      std::string path = stack.empty() ? "" : child_path(stack.back());
      if (c == '{' || c == '[') {
        stack.push_back(Level{c == '[', 0, "", path});
        ++i;
        if (c == '{') {
          expect_key = true;
        } else {
          skip();
          if (i < t.size() && t[i] != ']' && child_path(stack.back()) == target) return i;
        }
        continue;
      }
      if (c == '"') read_string();
      else while (i < t.size() && !std::strchr(",}] \t\r\n/", t[i])) ++i;
    }
    if (stack.empty()) return std::string::npos;
  }
}

// A sentence about the character at a JSON syntax error (our own words).
std::string SyntaxProblem(const std::string& text, size_t offset) {
  if (offset >= text.size()) return "the file ends before the plan is complete (a missing } or ]?)";
  char c = text[offset];
  std::string what = std::isprint(static_cast<unsigned char>(c)) ? std::string("'") + c + "'" : "a control character";
  if (c == '}' || c == ']') return "unexpected " + what + " (a comma before it, or a missing value?)";
  if (c == '"') return "unexpected " + what + " (a missing comma or colon before it?)";
  if (c == '\'') return "unexpected " + what + " (JSON strings use double quotes)";
  return "unexpected " + what + " (strings need double quotes; true, false and null are lower case; "
         "no comma after the last item)";
}

}  // namespace

std::string PlaceInPlanFile(FileSystem* fs, const std::string& plan_path, const std::string& message) {
  if (plan_path.empty()) return message;
  size_t colon = message.find(": ");
  if (colon == std::string::npos || colon == 0) return message;
  std::string key = message.substr(0, colon);
  for (char ch : key) {
    if (!std::isalnum(static_cast<unsigned char>(ch)) && !std::strchr("_$.[]*-", ch)) return message;
  }
  auto read = ReadWholeFile(fs, plan_path);
  if (!read.ok()) return message;
  const std::string& text = read.value();
  // The deepest part of the path that the file has ("gate.max_x" is there even
  // when the error is about one of its members).
  for (std::string k = key; !k.empty();) {
    size_t at = FindKeyPath(text, k);
    if (at != std::string::npos) return plan_path + ":" + LineColumn(text, at) + ": " + message;
    size_t cut = k.find_last_of(".[");
    if (cut == std::string::npos) break;
    k.resize(cut);
  }
  return plan_path + ": " + message;
}

Result<Plan> LoadPlanFile(FileSystem* fs, const std::string& path) {
  auto read = ReadWholeFile(fs, path);
  if (!read.ok()) return Status::Usage("cannot read the plan file " + path);
  const std::string& text = read.value();
  Json j;
  try {
    j = Json::parse(text, nullptr, true, /*ignore_comments=*/true);
  } catch (const nlohmann::json::parse_error& e) {
    // e.byte is the 1-based offset of the error; the sentence is our own.
    const size_t at = e.byte > 0 ? e.byte - 1 : 0;
    return Status::Usage(path + ":" + LineColumn(text, at) + ": the plan is not valid JSON: " + SyntaxProblem(text, at));
  } catch (const nlohmann::json::exception&) {
    // Not a syntax error but still unreadable: a number too large for a double.
    return Status::Usage(path + ": the plan is not valid JSON: a number is too large (beyond 1.8e308)");
  }
  std::string base = std::filesystem::path(path).parent_path().string();
  auto plan = PlanFromJson(j, base, path);
  if (!plan.ok()) {
    // "plan.json.inputs[0].layout: ..." -> "plan.json:4:6: inputs[0].layout: ..."
    std::string m = plan.status().message();
    if (m.compare(0, path.size() + 1, path + ".") == 0) m = m.substr(path.size() + 1);
    else if (m.compare(0, path.size() + 2, path + ": ") == 0) return Status::Usage(m);
    return Status::Usage(PlaceInPlanFile(fs, path, m));
  }
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
