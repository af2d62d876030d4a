// Stage settings on the command line; see stage_options.h.
#include "cli/stage_options.h"

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include <algorithm>
#include <filesystem>
#include <set>

namespace prefsift {

using Json = nlohmann::ordered_json;

namespace {

bool Runs(const std::vector<std::string>& stages, const char* name) {
  return std::find(stages.begin(), stages.end(), name) != stages.end();
}

// A path from the command line is relative to the working folder; a plan's
// paths are resolved against the plan's folder, so with a plan file it is made
// absolute (without one it stays as typed, and outputs do not name the folder).
std::string FromCommandLine(const Plan& plan, const std::string& path) {
  if (plan.plan_path.empty()) return path;
  return std::filesystem::absolute(path).lexically_normal().string();
}

std::string Stem(const std::string& path) {
  std::string name = std::filesystem::path(path).filename().string();
  for (const char* ext : {".gz", ".zst", ".jsonl", ".json", ".txt"}) {
    size_t n = std::string(ext).size();
    if (name.size() > n && name.compare(name.size() - n, n, ext) == 0) name.resize(name.size() - n);
  }
  return name.empty() ? "eval" : name;
}

Json& Stage(Plan* plan, const char* name) {
  if (!plan->stages.is_object()) plan->stages = Json::object();
  if (!plan->stages.contains(name) || !plan->stages[name].is_object()) plan->stages[name] = Json::object();
  return plan->stages[name];
}

}  // namespace

void AddStageOptions(CLI::App* cmd, const std::vector<std::string>& stages, StageOptions* o) {
  if (Runs(stages, "exact")) {
    cmd->add_option("--conflicts", o->conflicts,
                    "Label conflicts: keep-majority (default), drop-all or keep-all (plan: stages.exact.conflicts)");
  }
  if (Runs(stages, "near")) {
    cmd->add_option("--threshold", o->near_threshold,
                    "Near-duplicate prompt similarity, 0..1 (default 0.8; plan: stages.near.threshold)");
  }
  if (Runs(stages, "leakage")) {
    cmd->add_option("--eval", o->evals,
                    "An evaluation set, FILE (one prompt a line) or FILE:POINTER (JSONL, the JSON Pointer of the "
                    "prompt), e.g. --eval heldout.txt --eval staff.jsonl:/question (repeatable; plan: "
                    "stages.leakage.eval_sets)");
  }
  if (Runs(stages, "screen")) {
    cmd->add_option("--rules", o->rules,
                    "A personal-data rule pack, by name in rules/ or by path (repeatable; default: every pack; "
                    "plan: stages.screen.packs)");
  }
  if (Runs(stages, "bias")) {
    cmd->add_option("--alpha", o->alpha, "Significance level of the bias tests (default 0.05; plan: stages.bias.alpha)");
  }
  if (Runs(stages, "split")) {
    cmd->add_option("--split", o->splits,
                    "A split and its share, NAME=RATIO, e.g. --split train=0.9 --split test=0.1 (repeatable; "
                    "default train 0.8, valid 0.1, test 0.1; plan: stages.split.splits)");
  }
}

Status ApplyStageOptions(const StageOptions& o, Plan* plan) {
  if (!o.conflicts.empty()) Stage(plan, "exact")["conflicts"] = o.conflicts;
  if (o.near_threshold >= 0) Stage(plan, "near")["threshold"] = o.near_threshold;
  if (o.alpha >= 0) Stage(plan, "bias")["alpha"] = o.alpha;
  if (!o.evals.empty()) {
    Json sets = Json::array();
    std::set<std::string> names;
    for (const auto& e : o.evals) {
      // FILE:POINTER, where the pointer starts with '/' (RFC 6901).
      size_t colon = e.find(":/");
      std::string file = colon == std::string::npos ? e : e.substr(0, colon);
      if (file.empty()) return Status::Usage("--eval " + e + ": expected FILE or FILE:POINTER, e.g. staff.jsonl:/question");
      std::string name = Stem(file);
      for (int k = 2; !names.insert(name).second; ++k) name = Stem(file) + "_" + std::to_string(k);
      Json set{{"name", name}, {"path", FromCommandLine(*plan, file)}};
      if (colon != std::string::npos) {
        set["text"] = e.substr(colon + 1);
      } else {
        for (const char* ext : {".jsonl", ".json", ".jsonl.gz", ".jsonl.zst"}) {
          const size_t n = std::string(ext).size();
          if (file.size() > n && file.compare(file.size() - n, n, ext) == 0) {
            return Status::Usage("--eval " + e + ": a JSONL evaluation set needs the JSON Pointer of its prompt, "
                                 "e.g. --eval " + file + ":/question");
          }
        }
        set["format"] = "text";
      }
      sets.push_back(std::move(set));
    }
    Stage(plan, "leakage")["eval_sets"] = std::move(sets);
  }
  if (!o.rules.empty()) {
    Json packs = Json::array();
    for (const auto& r : o.rules) packs.push_back(r.find('/') == std::string::npos ? r : FromCommandLine(*plan, r));
    Stage(plan, "screen")["packs"] = std::move(packs);
  }
  if (!o.splits.empty()) {
    Json splits = Json::object();
    for (const auto& sp : o.splits) {
      size_t eq = sp.find('=');
      char* end = nullptr;
      double ratio = eq == std::string::npos ? -1 : std::strtod(sp.c_str() + eq + 1, &end);
      if (eq == std::string::npos || eq == 0 || !end || *end != '\0' || ratio <= 0 || ratio > 1) {
        return Status::Usage("--split " + sp + ": expected NAME=RATIO with a ratio in (0, 1], e.g. --split train=0.9");
      }
      splits[sp.substr(0, eq)] = ratio;
    }
    Stage(plan, "split")["splits"] = std::move(splits);
  }
  return Status::Ok();
}

Status CheckStageCanWork(const Plan& plan, const std::vector<std::string>& stages, const std::string& command) {
  if (stages.size() != 1) return Status::Ok();
  const std::string& stage = stages[0];
  const Json* settings = plan.stages.is_object() && plan.stages.contains(stage) ? &plan.stages[stage] : nullptr;
  if (settings && settings->is_object() && settings->contains("enabled") && (*settings)["enabled"] == false) {
    return Status::Usage(command + ": nothing to do: the plan disables this stage (stages." + stage +
                         ".enabled is false)");
  }
  if (stage == "leakage") {
    const bool has_sets = settings && settings->is_object() && settings->contains("eval_sets") &&
                          (*settings)["eval_sets"].is_array() && !(*settings)["eval_sets"].empty();
    if (!has_sets) {
      return Status::Usage(command + ": nothing to do: no evaluation sets; name one with --eval FILE or --eval "
                                     "FILE:POINTER (repeatable), or in the plan under stages.leakage.eval_sets");
    }
  }
  return Status::Ok();
}

}  // namespace prefsift
