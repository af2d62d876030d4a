#include "report/summary.h"

#include "report/tool_info.h"

namespace prefsift {

using Json = nlohmann::ordered_json;

Json BuildSummary(const Plan& plan, const RunState& st, const std::vector<std::pair<std::string, Json>>& stage_sections,
                  const std::map<std::string, uint64_t>& written) {
  Json s;
  s["tool"] = ToolInfo();
  uint64_t entries = 0, kept = 0, rejected = 0;
  Json inputs = Json::array();
  for (size_t i = 0; i < plan.inputs.size(); ++i) {
    const InputStats& is = st.inputs[i];
    Json reasons = Json::object();
    for (const auto& [r, n] : is.rejected_by_reason) reasons[r] = n;
    Json layout;
    LayoutToJson(plan.inputs[i].layout, &layout);
    inputs.push_back(Json{{"name", plan.inputs[i].name},
                          {"path", plan.inputs[i].path},
                          {"compression", is.compression},
                          {"layout", layout},
                          {"lines", is.lines},
                          {"blank_lines", is.blank_lines},
                          {"records_in", is.entries},
                          {"parsed", is.records},
                          {"kept", is.kept},
                          {"rejected", is.rejected},
                          {"rejected_by_reason", reasons}});
    entries += is.entries;
    kept += is.kept;
    rejected += is.rejected;
  }
  s["ledger"] = Json{{"records_in", entries},
                     {"kept", kept},
                     {"rejected", rejected},
                     {"balanced", kept + rejected == entries},
                     {"note", "records_in counts every non-blank input line; each ends in exactly one output file"}};
  s["inputs"] = inputs;
  Json by_stage = Json::array();
  for (const auto& [stage, reasons] : st.rejects_by_stage()) {
    uint64_t total = 0;
    Json r = Json::object();
    for (const auto& [reason, n] : reasons) {
      r[reason] = n;
      total += n;
    }
    by_stage.push_back(Json{{"stage", stage}, {"rejected", total}, {"by_reason", r}});
  }
  s["rejects_by_stage"] = by_stage;
  Json outs = Json::object();
  for (const auto& [name, n] : written) outs[name] = n;
  s["outputs"] = outs;
  Json settings;
  settings["seed"] = plan.seed;
  settings["normalize"] = Json{{"form", "NFKC with case folding, default-ignorables removed"},
                               {"whitespace", "folded"},
                               {"strip_punctuation", plan.normalize.strip_punctuation}};
  settings["limits"] = Json{{"max_line_bytes", plan.limits.max_line_bytes},
                            {"max_depth", plan.limits.max_depth},
                            {"max_candidates", plan.limits.max_candidates},
                            {"max_text_bytes", plan.limits.max_text_bytes}};
  if (!plan.plan_digest.empty()) settings["plan_sha256"] = plan.plan_digest;
  s["settings"] = settings;
  Json sections = Json::object();
  for (const auto& [name, sec] : stage_sections) sections[name] = sec;
  s["stages"] = sections;
  return s;
}

void PrintLedgerTable(const Json& s, std::FILE* out) {
  std::fprintf(out, "prefsift ledger\n");
  std::fprintf(out, "  %-28s %10s %10s %10s\n", "input", "records", "kept", "rejected");
  for (const auto& in : s["inputs"]) {
    std::fprintf(out, "  %-28s %10llu %10llu %10llu\n", in["name"].get<std::string>().c_str(),
                 static_cast<unsigned long long>(in["records_in"].get<uint64_t>()),
                 static_cast<unsigned long long>(in["kept"].get<uint64_t>()),
                 static_cast<unsigned long long>(in["rejected"].get<uint64_t>()));
  }
  const Json& l = s["ledger"];
  std::fprintf(out, "  %-28s %10llu %10llu %10llu  %s\n", "total",
               static_cast<unsigned long long>(l["records_in"].get<uint64_t>()),
               static_cast<unsigned long long>(l["kept"].get<uint64_t>()),
               static_cast<unsigned long long>(l["rejected"].get<uint64_t>()),
               l["balanced"].get<bool>() ? "(balanced)" : "(NOT BALANCED)");
  if (!s["rejects_by_stage"].empty()) {
    std::fprintf(out, "  %-12s %-30s %10s\n", "stage", "reason", "rejected");
    for (const auto& st : s["rejects_by_stage"]) {
      for (auto it = st["by_reason"].begin(); it != st["by_reason"].end(); ++it) {
        std::fprintf(out, "  %-12s %-30s %10llu\n", st["stage"].get<std::string>().c_str(), it.key().c_str(),
                     static_cast<unsigned long long>(it.value().get<uint64_t>()));
      }
    }
  }
  // The gate's verdict and every check that did not pass, so exit code 4 explains itself.
  if (s.contains("gate") && s["gate"].is_object() && s["gate"].contains("verdict")) {
    const Json& g = s["gate"];
    std::string verdict = g["verdict"].is_string() ? g["verdict"].get<std::string>() : "?";
    if (g.value("default_gate", false)) verdict += " (default gate: the plan has none; docs/gate.md)";
    if (verdict.rfind("incomplete", 0) == 0) {
      verdict += g.value("fails_the_run", false) ? " - fails the run (a check could not be evaluated; "
                                                   "gate.on_incomplete: \"pass\" accepts this)"
                                                 : " - passes (gate.on_incomplete is \"pass\")";
    }
    std::fprintf(out, "gate: %s\n", verdict.c_str());
    if (g.contains("checks") && g["checks"].is_array()) {
      for (const auto& c : g["checks"]) {
        std::string verdict = c.value("verdict", "");
        if (verdict == "pass") continue;
        std::fprintf(out, "  %-28s %-14s value %s, threshold %s\n", c.value("check", "?").c_str(), verdict.c_str(),
                     c.contains("value") ? c["value"].dump().c_str() : "null",
                     c.contains("threshold") ? c["threshold"].dump().c_str() : "null");
      }
    }
  }
}

}  // namespace prefsift
