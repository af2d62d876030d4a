#include "pipeline/parts.h"

#include <nlohmann/json.hpp>

#include "core/plan.h"

namespace prefsift {

using Json = nlohmann::ordered_json;

std::string PartsJson(const std::vector<Part>& parts) {
  Json list = Json::array();
  for (const Part& p : parts) {
    list.push_back(Json{{"part", p.part},
                        {"input", p.input},
                        {"path", p.path},
                        {"begin", p.begin},
                        {"end", p.end ? Json(*p.end) : Json(nullptr)},
                        {"first_line", p.first_line}});
  }
  return Json{{"format", "prefsift-parts"}, {"version", 1}, {"parts", std::move(list)}}.dump(2) + "\n";
}

Result<std::vector<Part>> ParsePartsJson(const std::string& text, const std::string& where, const Plan* plan) {
  Json j = Json::parse(text, nullptr, /*allow_exceptions=*/false);
  auto bad = [&](const std::string& why) { return Status::Usage(where + ": " + why); };
  if (j.is_discarded() || !j.is_object()) return bad("not a JSON object");
  if (!j.contains("format") || j["format"] != "prefsift-parts") return bad("\"format\" must be \"prefsift-parts\"");
  if (!j.contains("version") || !j["version"].is_number_integer() || j["version"].get<int64_t>() != 1) {
    return bad("\"version\" must be 1 (the only version this prefsift reads)");
  }
  if (!j.contains("parts") || !j["parts"].is_array()) return bad("\"parts\" must be an array");
  std::vector<Part> parts;
  for (size_t i = 0; i < j["parts"].size(); ++i) {
    const Json& p = j["parts"][i];
    const std::string at = "/parts/" + std::to_string(i);
    if (!p.is_object()) return bad(at + ": must be an object");
    auto whole = [&](const char* key, uint64_t* out) -> bool {
      if (!p.contains(key) || !p[key].is_number_unsigned()) return false;
      *out = p[key].get<uint64_t>();
      return true;
    };
    Part part;
    uint64_t v = 0;
    if (!whole("part", &v) || v != i) return bad(at + "/part: must be " + std::to_string(i) + " (parts in order from 0)");
    part.part = static_cast<uint32_t>(v);
    if (!whole("input", &v) || v > UINT32_MAX) return bad(at + "/input: must be a whole number");
    part.input = static_cast<uint32_t>(v);
    if (!p.contains("path") || !p["path"].is_string()) return bad(at + "/path: must be a string");
    part.path = p["path"].get<std::string>();
    if (!whole("begin", &part.begin)) return bad(at + "/begin: must be a whole number");
    if (!whole("first_line", &part.first_line) || part.first_line == 0) {
      return bad(at + "/first_line: must be a whole number from 1");
    }
    if (!p.contains("end") || (!p["end"].is_null() && !p["end"].is_number_unsigned())) {
      return bad(at + "/end: must be a whole number or null");
    }
    if (!p["end"].is_null()) part.end = p["end"].get<uint64_t>();
    if (part.end && *part.end < part.begin) return bad(at + "/end: is before begin");
    if ((part.begin == 0) != (part.first_line == 1)) {
      return bad(at + ": a part that starts at byte 0 starts at line 1, and only such a part");
    }
    if (!parts.empty()) {
      const Part& prev = parts.back();
      if (part.input == prev.input) {
        if (!prev.end) return bad(at + ": follows a part of the same input that runs to the end of the file");
        if (part.begin != *prev.end) {
          return bad(at + "/begin: must be " + std::to_string(*prev.end) + ", the end of the part before");
        }
        if (part.path != prev.path) return bad(at + "/path: differs from the path of the part before");
      } else if (part.input != prev.input + 1 || part.begin != 0) {
        return bad(at + ": parts must cover the inputs in order, each from byte 0");
      }
    } else if (part.input != 0 || part.begin != 0) {
      return bad(at + ": the first part must start input 0 at byte 0");
    }
    parts.push_back(std::move(part));
  }
  if (parts.empty()) return bad("\"parts\" is empty");
  if (plan) {
    if (parts.back().input + 1 != plan->inputs.size()) {
      return bad("the parts cover " + std::to_string(parts.back().input + 1) + " input(s), the plan has " +
                 std::to_string(plan->inputs.size()));
    }
    for (const Part& p : parts) {
      if (p.path != plan->inputs[p.input].path) {
        return bad("/parts/" + std::to_string(p.part) + "/path: \"" + p.path + "\" is not input " +
                   std::to_string(p.input) + " of the plan (\"" + plan->inputs[p.input].path + "\")");
      }
    }
  }
  return parts;
}

std::vector<Part> WholeInputParts(const Plan& plan) {
  std::vector<Part> parts;
  for (uint32_t i = 0; i < plan.inputs.size(); ++i) {
    Part p;
    p.part = i;
    p.input = i;
    p.path = plan.inputs[i].path;
    parts.push_back(std::move(p));
  }
  return parts;
}

}  // namespace prefsift
