// report.html: one self-contained page (no external scripts, styles or fonts)
// with inline SVG charts read from summary.json sections; a chart whose stage
// did not run says "stage not run" (docs/report.md).
//
// Every chart is a <figure class="chart" data-chart=NAME data-state=STATE>,
// STATE "data", "empty" or "not-run"; data marks are SVG elements with class
// "mark". A small inline script writes a check of this into
// <output id="self-check"> after load (for the headless-browser test).
// Thread-safety: pure function.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <string>

namespace prefsift {

std::string RenderHtmlReport(const nlohmann::ordered_json& summary, const nlohmann::ordered_json& datasheet);

}  // namespace prefsift
