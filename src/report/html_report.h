// report.html: one self-contained page (no external scripts, styles, fonts or
// requests) that answers, in this order: did the gate pass (every check with
// value, threshold and verdict); what was removed and why (rejects by stage and
// reason, one masked example each); what a reviewer should look at (position
// and length tests, flagged annotators and sources, the shortcut audit);
// leakage per evaluation set and detector; near-duplicate cluster sizes;
// personal data by kind, masked; the splits and their group checks. Stages the
// page does not know get a generic section. docs/report.md.
//
// Every chart is a <figure class="chart" data-chart=NAME data-state=STATE>,
// STATE "data", "empty" or "not-run", with a table of the same figures; data
// marks are SVG elements with class "mark". Tables carry data-* attributes with
// the raw figures (for the headless-browser test). Colours come from
// report/palette.h, one meaning each. A small inline script writes a check of
// the charts into <output id="self-check"> after load.
// Thread-safety: pure function.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <string>

namespace prefsift {

std::string RenderHtmlReport(const nlohmann::ordered_json& summary, const nlohmann::ordered_json& datasheet);

}  // namespace prefsift
