// Plan: everything a run needs, read from a JSON plan file (comments allowed)
// and/or the command line. Paths in a plan file are relative to the plan
// file's folder. docs/plan.md documents every key.
#pragma once

#include <nlohmann/json.hpp>

#include <cstdint>
#include <string>
#include <vector>

#include "core/layout.h"
#include "core/normalize.h"
#include "core/record_reader.h"
#include "core/status.h"

namespace prefsift {

class FileSystem;

struct InputSpec {
  std::string path;
  std::string name;     // short name used in ids and output names (default: file stem)
  Layout layout;
  std::string layout_key;  // canonical JSON of the layout, to tell layouts apart
};

struct Plan {
  std::vector<InputSpec> inputs;
  std::string output;            // output folder
  bool overwrite = false;
  bool strict = false;           // any reject makes the run fail (exit 5)
  uint64_t seed = 0;
  unsigned threads = 0;          // 0 = all cores
  InputLimits limits;
  NormalizeOptions normalize;
  nlohmann::ordered_json stages = nlohmann::ordered_json::object();  // per-stage settings by stage name
  nlohmann::ordered_json provenance = nlohmann::ordered_json::object();
  nlohmann::ordered_json gate = nlohmann::ordered_json::object();
  bool gate_given = false;       // the plan has a "gate" section (else the default gate applies, docs/gate.md)
  std::string plan_path;         // "" when built from the command line only
  std::string plan_digest;       // SHA-256 of the plan file bytes, hex ("" without a file)
};

// Reads a plan file. Errors name the file and the key at fault.
// Errors name the place in the file and the key path in the plan's own terms:
// "plan.json:4:6: inputs[0].layout: ...", or "plan.json:2:11: the plan is not
// valid JSON: ..." (never the JSON library's own wording).
Result<Plan> LoadPlanFile(FileSystem* fs, const std::string& path);

// `message` starting with a key path of the plan ("stages.near.threshold: ...",
// as stage settings report them) gets the file, line and column of that key
// in the plan file in front; other messages come back unchanged.
// The file is read through `fs` again (a file that cannot be read leaves the
// message unchanged).
std::string PlaceInPlanFile(FileSystem* fs, const std::string& plan_path, const std::string& message);

// Parses plan JSON already in memory; `base_dir` resolves relative paths and
// `where` names the source in errors.
Result<Plan> PlanFromJson(const nlohmann::ordered_json& j, const std::string& base_dir, const std::string& where);

// Adds an input given on the command line with a layout spec.
Status AddInput(Plan* plan, const std::string& path, const nlohmann::ordered_json& layout_spec,
                const std::string& where);

// A path from a plan file, resolved against the plan's folder (absolute paths
// and an empty base are returned as given).
std::string ResolvePlanPath(const std::string& base_dir, const std::string& path);

// The settings object of one stage ({} when absent).
const nlohmann::ordered_json& StageSettings(const Plan& plan, const std::string& stage);

}  // namespace prefsift
