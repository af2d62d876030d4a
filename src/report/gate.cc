// The gate; see gate.h and docs/gate.md.
#include "report/gate.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cmath>
#include <limits>

namespace prefsift {

using Json = nlohmann::ordered_json;

namespace {

struct CheckSpec {
  const char* key;
  bool at_most;  // value <= threshold passes (else value >= threshold)
  const char* what;
  const char* stage;  // the stage that gives its figure ("" = the pipeline itself)
};

const CheckSpec kChecks[] = {
    {"min_kept_share", false, "share of input records kept", ""},
    {"max_label_conflict_rate", true, "share of parsed records in label conflicts (stage exact)", "exact"},
    {"max_leakage_rate", true, "share of records leaking an evaluation set and still kept (stage leakage)", "leakage"},
    {"max_personal_data_findings", true, "personal-data findings left in kept records with no action (stage screen)",
     "screen"},
    {"min_position_p_adjusted", false, "smallest adjusted p of the chosen-slot tests (stage bias)", "bias"},
    {"max_shortcut_accuracy", true, "held-out accuracy of the surface-feature shortcut audit (stage bias)", "bias"},
    {"require_split_checks", false, "split checks passed (stage split)", "split"},
    {"max_shortcut_lift", true,
     "held-out accuracy of the shortcut audit above each comparison's chance rate, when significant (stage bias)",
     "bias"},
    {"min_annotator_alpha", false,
     "Krippendorff's alpha over comparisons judged by two or more annotators (stage annotators)", "annotators"},
    {"max_flagged_annotator_share", true,
     "share of judgments from annotators who are candidates for review (stage annotators)", "annotators"},
};

const char* StageOfCheck(const std::string& key) {
  for (const auto& c : kChecks) {
    if (key == c.key) return c.stage;
  }
  return "";
}

Json Verdict(const std::string& key, const std::string& scope, const std::string& what, double value,
             const Json& threshold, bool at_most, const std::string& why_not) {
  Json c;
  c["check"] = key;
  if (!scope.empty()) c["scope"] = scope;
  c["measures"] = what;
  c["threshold"] = threshold;
  if (!why_not.empty() || std::isnan(value)) {
    c["value"] = nullptr;
    c["verdict"] = "not evaluated";
    c["reason"] = why_not.empty() ? "no figure" : why_not;
    return c;
  }
  c["value"] = std::round(value * 1e6) / 1e6;
  double t = threshold.is_boolean() ? 1.0 : threshold.get<double>();
  bool pass = at_most ? value <= t : value >= t;
  c["verdict"] = pass ? "pass" : "fail";
  return c;
}

}  // namespace

Status ValidateGate(const Json& gate) {
  if (!gate.is_object()) return Status::Usage("plan: \"gate\" must be an object (docs/gate.md)");
  for (auto it = gate.begin(); it != gate.end(); ++it) {
    const std::string& k = it.key();
    if (k == "$comment") continue;
    if (k == "on_incomplete") {
      if (!it.value().is_string() || (it.value() != "fail" && it.value() != "pass")) {
        return Status::Usage("gate.on_incomplete: must be \"fail\" (the default: a check that could not be "
                             "evaluated fails the run) or \"pass\"");
      }
      continue;
    }
    const CheckSpec* spec = nullptr;
    for (const auto& c : kChecks) {
      if (k == c.key) spec = &c;
    }
    if (!spec) {
      std::string known;
      for (const auto& c : kChecks) known += std::string(known.empty() ? "" : ", ") + c.key;
      return Status::Usage("gate." + k + ": unknown check (known: " + known + ", and on_incomplete)");
    }
    const Json& v = it.value();
    if (k == "require_split_checks") {
      if (!v.is_boolean()) return Status::Usage("gate.require_split_checks: must be true or false");
    } else if (k == "max_leakage_rate" && v.is_object()) {
      for (auto s = v.begin(); s != v.end(); ++s) {
        if (!s.value().is_number() || s.value().get<double>() < 0) {
          return Status::Usage("gate.max_leakage_rate." + s.key() + ": must be a number >= 0");
        }
      }
    } else if (!v.is_number() || v.get<double>() < 0) {
      return Status::Usage("gate." + k + ": must be a number >= 0" +
                           (k == "max_leakage_rate" ? std::string(" or an object of evaluation set name to rate") : ""));
    } else if ((k.find("share") != std::string::npos || k.find("rate") != std::string::npos ||
                k.find("accuracy") != std::string::npos || k.find("_p_") != std::string::npos) &&
               v.get<double>() > 1) {
      return Status::Usage("gate." + k + ": must be between 0 and 1");
    }
  }
  return Status::Ok();
}

Json DecideGate(const Plan& plan, const GateFigures& figures, const std::vector<std::string>& command_stages,
                bool* failed) {
  const bool defaulted = !plan.gate_given && plan.gate.empty();  // a plan built in code may set plan.gate
  return EvaluateGate(defaulted ? DefaultGate() : plan.gate, figures, failed, defaulted, &command_stages);
}

const Json& DefaultGate() {
  // Small on purpose: what any reviewer wants whatever the data. Bias
  // thresholds depend on the data and are left to the plan.
  static const Json k = {{"min_kept_share", 0.5},
                         {"max_leakage_rate", 0.0},
                         {"max_personal_data_findings", 0},
                         {"require_split_checks", true}};
  return k;
}

Json EvaluateGate(const Json& gate, const GateFigures& f, bool* failed, bool defaulted,
                  const std::vector<std::string>* command_stages) {
  const auto ran = [&](const char* stage) { return f.stages_ran.count(stage) > 0; };
  const auto value = [](const std::optional<double>& v) { return v ? *v : std::nan(""); };
  Json checks = Json::array();
  for (const auto& spec : kChecks) {
    if (!gate.contains(spec.key)) continue;
    const Json& thr = gate[spec.key];
    const std::string key = spec.key;
    if (key == "min_kept_share") {
      const double in = static_cast<double>(f.records_in), kept = static_cast<double>(f.kept);
      checks.push_back(Verdict(key, "", spec.what, in > 0 ? kept / in : std::nan(""), thr, spec.at_most,
                               in > 0 ? "" : "no input records"));
    } else if (key == "max_label_conflict_rate") {
      if (!ran("exact")) {
        checks.push_back(Verdict(key, "", spec.what, 0, thr, spec.at_most, "stage exact did not run"));
        continue;
      }
      const double parsed = static_cast<double>(f.parsed);
      const double conf = static_cast<double>(f.label_conflict_records);
      checks.push_back(Verdict(key, "", spec.what, parsed > 0 ? conf / parsed : std::nan(""), thr, spec.at_most,
                               parsed > 0 ? "" : "no parsed records"));
    } else if (key == "max_leakage_rate") {
      if (f.leakage_by_set.empty()) {
        checks.push_back(Verdict(key, "", spec.what, 0, thr, spec.at_most,
                                 ran("leakage") ? "no evaluation sets" : "stage leakage did not run"));
        continue;
      }
      // All contaminated records dropped -> nothing leaks into the output.
      for (const auto& set : f.leakage_by_set) {
        Json t = thr;
        if (thr.is_object()) {
          if (thr.contains(set.name)) t = thr[set.name];
          else if (thr.contains("*")) t = thr["*"];
          else continue;
        }
        checks.push_back(Verdict(key, set.name, spec.what, f.leakage_none_flagged ? 0.0 : set.rate, t, spec.at_most, ""));
      }
    } else if (key == "max_personal_data_findings") {
      const long long left = f.personal_data_left ? *f.personal_data_left : -1;
      checks.push_back(Verdict(key, "", spec.what, static_cast<double>(left), thr, spec.at_most,
                               !ran("screen")           ? "stage screen did not run"
                               : !f.personal_data_left ? "the screen gave no count"
                                                        : ""));
    } else if (key == "min_position_p_adjusted") {
      if (!f.position_ran) {
        checks.push_back(Verdict(key, "", spec.what, 0, thr, spec.at_most, "stage bias did not run"));
        continue;
      }
      checks.push_back(Verdict(key, f.position_scope, spec.what, value(f.min_position_p), thr, spec.at_most,
                               f.min_position_p ? "" : "no position test had data"));
    } else if (key == "max_shortcut_accuracy") {
      checks.push_back(Verdict(key, "", spec.what, value(f.shortcut_accuracy), thr, spec.at_most,
                               !ran("bias")             ? "stage bias did not run"
                               : !f.shortcut_accuracy ? "the audit did not run (too few comparisons?)"
                                                      : ""));
    } else if (key == "min_annotator_alpha" || key == "max_flagged_annotator_share") {
      const bool alpha = key == "min_annotator_alpha";
      const std::optional<double>& v = alpha ? f.annotator_alpha : f.flagged_annotator_share;
      checks.push_back(Verdict(key, "", spec.what, value(v), thr, spec.at_most,
                               !ran("annotators") ? "stage annotators did not run"
                               : !v               ? "no comparison was judged by two or more annotators"
                                                  : ""));
    } else if (key == "max_shortcut_lift") {
      // Judged against chance (docs/bias.md): the lift counts only when the
      // audit's own test found it significant; otherwise the value is 0.
      double v = value(f.shortcut_lift);
      if (v == v && !f.shortcut_flagged) v = std::min(v, 0.0);
      checks.push_back(Verdict(key, "", spec.what, v, thr, spec.at_most,
                               !ran("bias")         ? "stage bias did not run"
                               : !f.shortcut_lift ? "the audit did not run (too few comparisons?)"
                                                  : ""));
    } else if (key == "require_split_checks") {
      if (!thr.get<bool>()) continue;
      const auto& passed = f.split_checks_passed;
      checks.push_back(Verdict(key, "", spec.what, passed ? (*passed ? 1.0 : 0.0) : 0, thr, spec.at_most,
                               passed ? "" : "stage split did not run"));
    }
  }
  Json skipped = Json::array();
  if (command_stages) {
    // A command that runs some stages only (e.g. `prefsift screen`) skips the
    // checks of the others: nobody asked this command for them.
    Json kept = Json::array();
    for (auto& c : checks) {
      const std::string stage = StageOfCheck(c["check"].get<std::string>());
      if (!stage.empty() &&
          std::find(command_stages->begin(), command_stages->end(), stage) == command_stages->end()) {
        skipped.push_back(Json{{"check", c["check"]}, {"reason", "this command does not run stage " + stage}});
      } else {
        kept.push_back(std::move(c));
      }
    }
    checks = std::move(kept);
  }
  if (defaulted) {
    // A default check whose stage did not run (or has nothing to check) is
    // skipped, not "not evaluated": the user never asked for it.
    Json kept = Json::array();
    for (auto& c : checks) {
      if (c["verdict"] == "not evaluated") {
        skipped.push_back(Json{{"check", c["check"]}, {"reason", c["reason"]}});
      } else {
        kept.push_back(std::move(c));
      }
    }
    checks = std::move(kept);
  }
  uint64_t pass = 0, fail = 0, not_eval = 0;
  for (const auto& c : checks) {
    const std::string v = c["verdict"].get<std::string>();
    if (v == "pass") ++pass;
    else if (v == "fail") ++fail;
    else ++not_eval;
  }
  const bool incomplete_passes = gate.contains("on_incomplete") && gate["on_incomplete"] == "pass";
  *failed = fail > 0 || (not_eval > 0 && !incomplete_passes);
  Json g;
  g["verdict"] = fail ? "fail" : not_eval ? "incomplete" : pass ? "pass" : "no checks";
  g["fails_the_run"] = *failed;
  if (defaulted) g["default_gate"] = true;
  g["on_incomplete"] = incomplete_passes ? "pass" : "fail";
  g["passed"] = pass;
  g["failed"] = fail;
  g["not_evaluated"] = not_eval;
  g["note"] = checks.empty() && !defaulted ? "the plan sets no gate checks"
              : defaulted ? "the plan has no \"gate\" section, so the default gate applies (docs/gate.md); checks "
                            "whose stage did not run are skipped"
              : incomplete_passes
                  ? "a check whose stage did not run is \"not evaluated\"; the plan lets an incomplete gate pass"
                  : "a check whose stage did not run is \"not evaluated\", which is not a pass: an incomplete gate "
                    "fails the run unless gate.on_incomplete is \"pass\"";
  g["checks"] = std::move(checks);
  if (!skipped.empty() || defaulted) g["skipped"] = std::move(skipped);
  return g;
}

}  // namespace prefsift
