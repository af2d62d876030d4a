// Plan: everything a run needs, read from a JSON plan file (comments allowed)
// and/or the command line. Paths in a plan file are relative to the plan
// file's folder. docs/plan.md documents every key.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include "core/layout.h"
#include "core/normalize.h"
#include "core/record_reader.h"
#include "core/status.h"

namespace prefsift {

class FileSystem;

// A JSON object of the plan (a section such as "stages" or "gate"), held
// behind a pointer so that this header needs only <nlohmann/json_fwd.hpp>.
// It copies like a value and reads like the JSON value it holds: it converts
// to nlohmann::ordered_json&, and the members below forward to it. They are
// templates, compiled where they are used, so only a file that uses them
// needs <nlohmann/json.hpp> (which that file includes anyway to use JSON).
class JsonSection {
 public:
  JsonSection();  // an empty object
  JsonSection(const JsonSection& other);
  JsonSection(JsonSection&& other) noexcept;
  JsonSection& operator=(const JsonSection& other);
  JsonSection& operator=(JsonSection&& other) noexcept;
  JsonSection& operator=(const nlohmann::ordered_json& value);
  ~JsonSection();

  nlohmann::ordered_json& get() { return *value_; }
  const nlohmann::ordered_json& get() const { return *value_; }
  operator nlohmann::ordered_json&() { return *value_; }
  operator const nlohmann::ordered_json&() const { return *value_; }

  template <typename K>
  decltype(auto) operator[](const K& key) {
    return Value<K>()[key];
  }
  template <typename K>
  decltype(auto) operator[](const K& key) const {
    return Value<K>()[key];
  }
  template <typename K>
  bool contains(const K& key) const {
    return Value<K>().contains(key);
  }
  template <typename J = nlohmann::ordered_json>
  bool empty() const {
    return Value<J>().empty();
  }
  template <typename J = nlohmann::ordered_json>
  bool is_object() const {
    return Value<J>().is_object();
  }
  template <typename J = nlohmann::ordered_json>
  auto begin() {
    return Value<J>().begin();
  }
  template <typename J = nlohmann::ordered_json>
  auto end() {
    return Value<J>().end();
  }
  template <typename J = nlohmann::ordered_json>
  auto begin() const {
    return Value<J>().begin();
  }
  template <typename J = nlohmann::ordered_json>
  auto end() const {
    return Value<J>().end();
  }

 private:
  // The value as a type that depends on T, so the bodies above are compiled
  // only where they are used.
  template <typename T, typename J = nlohmann::ordered_json>
  J& Value() {
    return *value_;
  }
  template <typename T, typename J = nlohmann::ordered_json>
  const J& Value() const {
    return *value_;
  }
  std::unique_ptr<nlohmann::ordered_json, void (*)(nlohmann::ordered_json*)> value_;
};

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
  JsonSection stages;             // per-stage settings by stage name
  JsonSection provenance;
  JsonSection gate;
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
