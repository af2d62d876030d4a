// The gate: pass/fail thresholds from the plan's "gate" object, evaluated on
// the typed figures of the run (core/gate_figures.h) after every stage has
// decided and before pass 2 writes anything (docs/gate.md).
//
// Each check gives a value, its threshold and a verdict: "pass", "fail" or
// "not evaluated" (its stage did not run or gave no figure; not a pass).
// The overall verdict is "fail" when any check fails, else "incomplete" when
// a check was not evaluated, else "pass" ("no checks" for an empty gate).
// "fail" fails the run (exit code 4), and so does "incomplete" unless the plan
// sets gate.on_incomplete to "pass". A plan without a "gate" section gets the
// default gate (DefaultGate); its checks whose stage did not run are skipped.
// Thread-safety: pure functions.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <string>
#include <vector>

#include "core/gate_figures.h"
#include "core/plan.h"
#include "core/status.h"

namespace prefsift {

// Checks the gate object's keys and value types (usage errors name the key).
Status ValidateGate(const nlohmann::ordered_json& gate);

// The checks a plan without a "gate" section gets (docs/gate.md, "Default gate").
const nlohmann::ordered_json& DefaultGate();

// The plan's gate (or the default gate when the plan has none) over the run's
// figures; *failed is set when it fails the run. `command_stages`: the stages
// the command runs. REQUIRES: ValidateGate(plan.gate).ok().
nlohmann::ordered_json DecideGate(const Plan& plan, const GateFigures& figures,
                                  const std::vector<std::string>& command_stages, bool* failed);

// Evaluates the gate; returns the "gate" section. `*failed` is set when any
// check fails, or when one was not evaluated and on_incomplete is "fail".
// `defaulted`: the gate is DefaultGate() because the plan has none.
// `command_stages`: the stages the command runs (null = all); a check of a
// stage the command does not run is skipped, not "not evaluated".
// REQUIRES: ValidateGate(gate).ok().
nlohmann::ordered_json EvaluateGate(const nlohmann::ordered_json& gate, const GateFigures& figures, bool* failed,
                                    bool defaulted = false,
                                    const std::vector<std::string>* command_stages = nullptr);

}  // namespace prefsift
