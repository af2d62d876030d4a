// report.html; see html_report.h and docs/report.md.
#include "report/html_report.h"

#include "report/annotator_facts.h"
#include "report/html_escape.h"
#include "report/json_find.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <set>
#include <string>
#include <vector>

#include "report/datasheet.h"
#include "report/palette.h"

namespace prefsift {

using Json = nlohmann::ordered_json;

namespace {


std::string Str(const Json& j) { return j.is_string() ? j.get<std::string>() : j.is_null() ? "" : j.dump(); }

std::string Num(double v, int digits = 0) {
  char b[48];
  std::snprintf(b, sizeof b, "%.*f", digits, v);
  return b;
}

// A member, or null when absent (never throws).
const Json& V(const Json& j, const char* key) {
  static const Json kNull;
  return j.is_object() && j.contains(key) ? j[key] : kNull;
}

bool True(const Json& j, const char* key) { return V(j, key).is_boolean() && V(j, key).get<bool>(); }

double D(const Json& j, const char* key, double fallback = 0) {
  return j.is_object() && j.contains(key) && j[key].is_number() ? j[key].get<double>() : fallback;
}

std::string Fmt(double v) {
  if (v == std::floor(v) && std::fabs(v) < 1e15) {
    std::string s = Num(std::fabs(v)), o;  // thousands separators
    for (size_t i = 0; i < s.size(); ++i) {
      if (i && (s.size() - i) % 3 == 0) o += ',';
      o += s[i];
    }
    return (v < 0 ? "-" : "") + o;
  }
  if (v != 0 && std::fabs(v) < 0.001) {
    char b[32];
    std::snprintf(b, sizeof b, "%.2e", v);
    return b;
  }
  return Num(v, 3);
}

// A p-value: three significant digits, scientific below 0.001.
std::string FmtP(double p) {
  char b[32];
  if (p != 0 && p < 0.001) std::snprintf(b, sizeof b, "%.2e", p);
  else std::snprintf(b, sizeof b, "%.3f", p);
  return b;
}

// Any JSON value as short text, never raw JSON: numbers formatted, arrays of
// scalars joined, objects as "key: value" pairs.
std::string Plain(const Json& v) {
  if (v.is_null()) return "none";
  if (v.is_boolean()) return v.get<bool>() ? "yes" : "no";
  if (v.is_number()) return Fmt(v.get<double>());
  if (v.is_string()) return v.get<std::string>();
  std::string o;
  if (v.is_array()) {
    for (const auto& e : v) o += (o.empty() ? "" : ", ") + Plain(e);
    return o.empty() ? "none" : o;
  }
  for (auto it = v.begin(); it != v.end(); ++it) o += (o.empty() ? "" : "; ") + it.key() + ": " + Plain(it.value());
  return o.empty() ? "none" : o;
}

// The raw figure for a data-* attribute (JSON text of a number, or the string).
std::string Raw(const Json& v) { return v.is_string() ? v.get<std::string>() : v.dump(); }

std::string Attr(const char* name, const std::string& value) { return std::string(" ") + name + "=\"" + Esc(value) + "\""; }

// ---------------------------------------------------------------- charts

struct Row {
  std::string label;
  double value = 0;
  std::string note;    // shown right of the bar; default: the value
  std::string colour;  // palette hex
};

// Horizontal bars, one per row.
std::string HBars(const std::vector<Row>& rows) {
  double max = 0;
  for (const auto& r : rows) max = std::max(max, r.value);
  const int label_w = 240, bar_w = 330, row_h = 24, w = label_w + bar_w + 330;
  const int h = static_cast<int>(rows.size()) * row_h + 8;
  std::string s = "<svg viewBox=\"0 0 " + std::to_string(w) + " " + std::to_string(h) +
                  "\" width=\"100%\" role=\"img\" aria-hidden=\"true\" preserveAspectRatio=\"xMinYMin meet\">";
  for (size_t i = 0; i < rows.size(); ++i) {
    const Row& r = rows[i];
    int y = static_cast<int>(i) * row_h + 4;
    double len = max > 0 ? r.value / max * bar_w : 0;
    if (r.value > 0 && len < 2) len = 2;
    s += "<text x=\"" + std::to_string(label_w - 8) + "\" y=\"" + std::to_string(y + 16) +
         "\" text-anchor=\"end\" class=\"lbl\">" + Esc(r.label) + "</text>";
    s += "<rect class=\"mark\" x=\"" + std::to_string(label_w) + "\" y=\"" + std::to_string(y + 3) + "\" width=\"" +
         Num(len, 1) + "\" height=\"" + std::to_string(row_h - 8) + "\" fill=\"" + r.colour + "\"><title>" +
         Esc(r.label + ": " + Fmt(r.value)) + "</title></rect>";
    s += "<text x=\"" + Num(label_w + len + 6, 1) + "\" y=\"" + std::to_string(y + 16) + "\" class=\"val\">" +
         Esc(r.note.empty() ? Fmt(r.value) : r.note) + "</text>";
  }
  return s + "</svg>";
}

struct Series {
  std::string name;
  std::vector<double> values;  // one per category
  std::string colour;
};

// Vertical grouped bars: categories along x, one bar per series in each;
// `expected` (one per category, optional) is drawn as a dashed line.
std::string Grouped(const std::vector<std::string>& cats, const std::vector<Series>& series, bool percent,
                    const std::string& y_title, const std::vector<double>& expected = {}) {
  double max = 0;
  for (const auto& se : series) {
    for (double v : se.values) max = std::max(max, v);
  }
  for (double v : expected) max = std::max(max, v);
  if (max <= 0) max = 1;
  {  // a round axis maximum: 1, 2, 2.5 or 5 times a power of ten, times 4 ticks
    double step = max / 4, p = std::pow(10.0, std::floor(std::log10(step)));
    double nice = step <= p ? p : step <= 2 * p ? 2 * p : step <= 2.5 * p ? 2.5 * p : step <= 5 * p ? 5 * p : 10 * p;
    max = nice * 4;
  }
  int legend_w = 60;
  for (const auto& se : series) legend_w += 24 + 8 * static_cast<int>(se.name.size()) + 14;
  const int left = 60, top = 30, plot_h = 190, bottom = 46;
  const int group_w = std::max(36, std::min(110, static_cast<int>(640 / std::max<size_t>(1, cats.size()))));
  const int plot_w = group_w * static_cast<int>(cats.size());
  const int w = std::max(left + plot_w + 20, legend_w), h = top + plot_h + bottom;
  std::string s = "<svg viewBox=\"0 0 " + std::to_string(w) + " " + std::to_string(h) + "\" width=\"" +
                  std::to_string(std::min(100, w * 100 / 800)) +
                  "%\" role=\"img\" aria-hidden=\"true\" preserveAspectRatio=\"xMinYMin meet\">";
  int lx = left;
  for (const auto& se : series) {
    s += "<rect x=\"" + std::to_string(lx) + "\" y=\"6\" width=\"12\" height=\"12\" fill=\"" + se.colour + "\"/>";
    s += "<text x=\"" + std::to_string(lx + 16) + "\" y=\"16\" class=\"lbl\">" + Esc(se.name) + "</text>";
    lx += 24 + 8 * static_cast<int>(se.name.size()) + 14;
  }
  for (int t = 0; t <= 4; ++t) {
    double v = max * t / 4;
    int y = top + plot_h - plot_h * t / 4;
    s += "<line x1=\"" + std::to_string(left) + "\" x2=\"" + std::to_string(left + plot_w) + "\" y1=\"" +
         std::to_string(y) + "\" y2=\"" + std::to_string(y) + "\" class=\"grid\"/>";
    s += "<text x=\"" + std::to_string(left - 6) + "\" y=\"" + std::to_string(y + 4) +
         "\" text-anchor=\"end\" class=\"tick\">" + (percent ? Num(100 * v, v < 0.1 && v > 0 ? 1 : 0) + "%" : Fmt(v)) +
         "</text>";
  }
  s += "<text x=\"12\" y=\"" + std::to_string(top + plot_h / 2) + "\" class=\"tick\" transform=\"rotate(-90 12 " +
       std::to_string(top + plot_h / 2) + ")\" text-anchor=\"middle\">" + Esc(y_title) + "</text>";
  const double bw = (group_w - 10.0) / std::max<size_t>(1, series.size());
  for (size_t c = 0; c < cats.size(); ++c) {
    int gx = left + static_cast<int>(c) * group_w + 5;
    for (size_t k = 0; k < series.size(); ++k) {
      double v = c < series[k].values.size() ? series[k].values[c] : 0;
      double bh = v / max * plot_h;
      if (v > 0 && bh < 1) bh = 1;
      s += "<rect class=\"mark\" x=\"" + Num(gx + k * bw, 1) + "\" y=\"" + Num(top + plot_h - bh, 1) + "\" width=\"" +
           Num(std::max(1.0, bw - 2), 1) + "\" height=\"" + Num(bh, 1) + "\" fill=\"" + series[k].colour +
           "\"><title>" + Esc(series[k].name + ", " + cats[c] + ": " + (percent ? Num(100 * v, 1) + "%" : Fmt(v))) +
           "</title></rect>";
    }
    if (c < expected.size()) {
      double y = top + plot_h - expected[c] / max * plot_h;
      s += "<line x1=\"" + std::to_string(gx) + "\" x2=\"" + std::to_string(gx + group_w - 10) + "\" y1=\"" + Num(y, 1) +
           "\" y2=\"" + Num(y, 1) + "\" class=\"expected\" stroke=\"" + ColourOf("measure") + "\"/>";
    }
    s += "<text x=\"" + std::to_string(gx + (group_w - 10) / 2) + "\" y=\"" + std::to_string(top + plot_h + 16) +
         "\" text-anchor=\"middle\" class=\"tick\">" + Esc(cats[c]) + "</text>";
  }
  s += "<line x1=\"" + std::to_string(left) + "\" x2=\"" + std::to_string(left + plot_w) + "\" y1=\"" +
       std::to_string(top + plot_h) + "\" y2=\"" + std::to_string(top + plot_h) + "\" class=\"axis\"/>";
  return s + "</svg>";
}

// A chart with its table equivalent (`table` is shown under the chart).
std::string Figure(const std::string& name, const std::string& title, const std::string& state, const std::string& body,
                   const std::string& caption, const std::string& table = "") {
  std::string s = "<figure class=\"chart\" data-chart=\"" + name + "\" data-state=\"" + state + "\"><h3>" + Esc(title) +
                  "</h3>";
  if (state == "not-run") s += "<p class=\"missing\">stage not run</p>";
  else if (state == "empty") s += "<p class=\"missing\">" + Esc(body) + "</p>";
  else s += body;
  if (!caption.empty()) s += "<figcaption>" + Esc(caption) + "</figcaption>";
  if (state == "data" && !table.empty()) s += "<div class=\"equiv\">" + table + "</div>";
  return s + "</figure>\n";
}

// ---------------------------------------------------------------- tables

// A table from header cells and rows of HTML cells; `attrs` per row.
std::string Table(const std::string& id, const std::vector<std::string>& heads,
                  const std::vector<std::pair<std::string, std::vector<std::string>>>& rows) {
  std::string o = "<table" + (id.empty() ? std::string() : Attr("id", id)) + "><thead><tr>";
  for (const auto& h : heads) o += "<th>" + h + "</th>";
  o += "</tr></thead><tbody>";
  for (const auto& [attrs, cells] : rows) {
    o += "<tr" + attrs + ">";
    for (const auto& c : cells) o += "<td>" + c + "</td>";
    o += "</tr>";
  }
  return o + "</tbody></table>";
}

// Any JSON object as a two-column table of its fields (nested objects as
// dotted names, arrays of scalars joined, arrays of objects as inner tables):
// used for sections whose fields other stages may extend (the shortcut audit,
// split checks, stages this page does not know).
std::string FieldTable(const Json& obj, const std::string& id, int depth = 0);

std::string ArrayOfObjects(const Json& arr, int depth) {
  std::vector<std::string> keys;
  for (const auto& e : arr) {
    if (!e.is_object()) continue;
    for (auto it = e.begin(); it != e.end(); ++it) {
      if (std::find(keys.begin(), keys.end(), it.key()) == keys.end()) keys.push_back(it.key());
    }
  }
  std::vector<std::string> heads;
  for (const auto& k : keys) heads.push_back(Esc(k));
  std::vector<std::pair<std::string, std::vector<std::string>>> rows;
  for (const auto& e : arr) {
    std::vector<std::string> cells;
    for (const auto& k : keys) {
      if (!e.is_object() || !e.contains(k)) cells.push_back("");
      else if (e[k].is_object() && depth < 2) cells.push_back(FieldTable(e[k], "", depth + 1));
      else cells.push_back(Esc(Plain(e[k])));
    }
    rows.push_back({"", cells});
  }
  return Table("", heads, rows);
}

void FieldRows(const Json& obj, const std::string& prefix, int depth,
               std::vector<std::pair<std::string, std::vector<std::string>>>* rows) {
  for (auto it = obj.begin(); it != obj.end(); ++it) {
    const std::string key = prefix + it.key();
    const Json& v = it.value();
    if (v.is_object() && depth < 3 && !v.empty()) {
      FieldRows(v, key + ".", depth + 1, rows);
    } else if (v.is_array() && !v.empty() && v[0].is_object()) {
      rows->push_back({Attr("data-field", key), {"<code>" + Esc(key) + "</code>", ArrayOfObjects(v, depth + 1)}});
    } else {
      std::string attrs = Attr("data-field", key) + (v.is_number() ? Attr("data-value", Raw(v)) : std::string());
      rows->push_back({attrs, {"<code>" + Esc(key) + "</code>", Esc(Plain(v))}});
    }
  }
}

std::string FieldTable(const Json& obj, const std::string& id, int depth) {
  if (!obj.is_object()) return Esc(Plain(obj));
  std::vector<std::pair<std::string, std::vector<std::string>>> rows;
  FieldRows(obj, "", depth, &rows);
  return Table(id, {"field", "value"}, rows);
}

std::string Section(const std::string& id, const std::string& title, const std::string& body) {
  return "<section" + Attr("id", id) + "><h2>" + Esc(title) + "</h2>\n" + body + "</section>\n";
}

// The reasons page of the docs: one anchor per stage (docs/reasons.md).
std::string ReasonLink(const std::string& stage, const std::string& reason) {
  return "<a href=\"docs/reasons.md#" + Esc(stage) +
         "\" title=\"docs/reasons.md in the prefsift sources (installed as share/doc/prefsift/reasons.md)\"><code>" +
         Esc(reason) + "</code></a>";
}

std::string Swatch(const std::string& colour) {
  return "<span class=\"sw\" style=\"background:" + colour + "\" aria-hidden=\"true\"></span>";
}

// ---------------------------------------------------------------- 1. gate

std::string GateSection(const Json& s) {
  const Json* g = FindPath(s, {"gate"});
  std::string verdict = g ? Str((*g)["verdict"]) : "not evaluated";
  std::string cls = verdict == "pass" ? "pass" : verdict == "fail" ? "fail" : "other";
  std::string o = "<section class=\"gate " + cls + "\" id=\"gate\"" + Attr("data-verdict", verdict) +
                  "><h2>Did it pass? Gate: " + Esc(verdict) + "</h2>";
  const Json* checks = g ? FindPath(*g, {"checks"}) : nullptr;
  if (!checks || !checks->is_array() || checks->empty()) {
    o += "<p>" + Esc(g && g->contains("note") ? Str((*g)["note"]) : "The plan sets no gate checks.") + "</p>";
    return o + "</section>\n";
  }
  if (g->contains("failed")) {
    o += "<p>" + Esc(Plain((*g)["passed"])) + " passed, " + Esc(Plain((*g)["failed"])) + " failed, " +
         Esc(Plain(V(*g, "not_evaluated"))) + " not evaluated.</p>";
  }
  std::vector<std::pair<std::string, std::vector<std::string>>> rows;
  for (const auto& c : *checks) {
    std::string v = Str(V(c, "verdict"));
    const Json value = V(c, "value");
    std::string attrs = Attr("class", v == "pass" ? "ok" : v == "fail" ? "bad" : "na") + Attr("data-check", Str(c["check"])) +
                        Attr("data-scope", c.contains("scope") ? Str(c["scope"]) : "") + Attr("data-verdict", v) +
                        Attr("data-value", value.is_null() ? "" : Raw(value)) +
                        Attr("data-threshold", c.contains("threshold") ? Raw(c["threshold"]) : "");
    rows.push_back({attrs,
                    {"<code>" + Esc(Str(c["check"])) + "</code><div class=\"small\">" +
                         Esc(Str(V(c, "measures"))) + "</div>",
                     Esc(c.contains("scope") ? Str(c["scope"]) : ""),
                     value.is_null() ? "<span class=\"small\">" + Esc(Str(V(c, "reason"))) + "</span>"
                     : V(c, "threshold").is_boolean() && value.is_number() ? (value.get<double>() != 0 ? "yes" : "no")
                                                                            : Esc(Plain(value)),
                     Esc(c.contains("threshold") ? Plain(c["threshold"]) : ""), "<strong>" + Esc(v) + "</strong>"}});
  }
  o += Table("gate-checks", {"check", "scope", "value", "threshold", "verdict"}, rows);
  if (g->contains("note")) o += "<p class=\"small\">" + Esc(Str((*g)["note"])) + ".</p>";
  return o + "</section>\n";
}

// ---------------------------------------------------------------- 2. removed

std::string LedgerChart(const Json& s) {
  const Json* l = FindPath(s, {"ledger"});
  const std::string title = "Ledger: records read, rejected by stage, kept";
  if (!l) return Figure("ledger", title, "not-run", "", "");
  std::vector<Row> rows;
  rows.push_back({"records read", D(*l, "records_in"), "", ColourOf("measure")});
  rows.push_back({"rejected (all stages)", D(*l, "rejected"), "", ColourOf("rejected")});
  if (const Json* rb = FindPath(s, {"rejects_by_stage"})) {
    for (const auto& r : *rb) rows.push_back({"rejected by " + Str(r["stage"]), D(r, "rejected"), "", StageColour(Str(r["stage"]))});
  }
  rows.push_back({"kept", D(*l, "kept"), "", ColourOf("kept")});
  std::vector<std::pair<std::string, std::vector<std::string>>> trs;
  for (const auto& r : rows) trs.push_back({"", {Swatch(r.colour) + Esc(r.label), Esc(Fmt(r.value))}});
  return Figure("ledger", title, "data", HBars(rows),
                std::string("Every input record ends in exactly one output; the ledger ") +
                    (True(*l, "balanced") ? "balances." : "does NOT balance."),
                Table("", {"row", "records"}, trs));
}

// The example of a stage and reason from summary.examples.rejects, masked.
std::string RejectExample(const Json& s, const std::string& stage, const std::string& reason, bool whole) {
  if (whole) return "<span class=\"small\">in each batch's report</span>";
  const Json* ex = FindPath(s, {"examples", "rejects"});
  if (!ex || !ex->is_array()) return "";
  for (const auto& e : *ex) {
    if (Str(V(e, "stage")) != stage || Str(V(e, "reason")) != reason) continue;
    std::string place = Str(V(e, "input")) + " line " + Raw(V(e, "line"));
    if (e.contains("id") && e["id"].is_string()) place += " (" + e["id"].get<std::string>() + ")";
    if (e.contains("field")) place += ", " + Str(e["field"]);
    std::string o = "<span class=\"small\">" + Esc(place) + "</span><br>" + Esc(Str(V(e, "message")));
    if (e.contains("masked") && e["masked"].is_array()) {
      o += "<br><span class=\"small\">masked:</span> ";
      bool first = true;
      for (const auto& m : e["masked"]) {
        o += std::string(first ? "" : "; ") + "<code>" + Esc(Str(V(m, "kind"))) + "</code> at " +
             Esc(Str(V(m, "pointer"))) + " <code class=\"masked\">" + Esc(Str(V(m, "preview"))) +
             "</code>";
        first = false;
      }
    }
    return o;
  }
  return "";
}

std::string RejectsTable(const Json& s, bool whole) {
  const Json* rb = FindPath(s, {"rejects_by_stage"});
  if (!rb || rb->empty()) return "<p class=\"missing\" id=\"rejects-none\">no rejects</p>\n";
  std::vector<std::pair<std::string, std::vector<std::string>>> rows;
  for (const auto& r : *rb) {
    if (!r.contains("by_reason") || !r["by_reason"].is_object()) continue;
    const std::string stage = Str(r["stage"]);
    for (auto it = r["by_reason"].begin(); it != r["by_reason"].end(); ++it) {
      rows.push_back({Attr("data-stage", stage) + Attr("data-reason", it.key()) + Attr("data-count", Raw(it.value())),
                      {Swatch(StageColour(stage)) + Esc(stage), ReasonLink(stage, it.key()), Esc(Plain(it.value())),
                       RejectExample(s, stage, it.key(), whole)}});
    }
  }
  return Table("rejects", {"stage", "reason", "records", whole ? "example" : "example (masked: place and reason only)"},
               rows) +
         "\n<p class=\"small\">Reason codes link to the reasons page of the docs (docs/reasons.md). " +
         (whole ? "The records are in each batch's rejects.jsonl."
                : "Every rejected record, with its reason and details, is in rejects.jsonl; examples here never show "
                  "record text, and a record with personal data shows only the findings' masked forms.") +
         "</p>\n";
}

std::string RemovedSection(const Json& s) {
  const bool whole = FindPath(s, {"whole_store"}) != nullptr;
  return Section("removed", "What was removed, and why?", "<div class=\"grid\">" + LedgerChart(s) + "</div>" +
                                                               RejectsTable(s, whole));
}

// ---------------------------------------------------------------- 3. review

std::string SlotChart(const Json& s) {
  const Json* c = FindPath(s, {"stages", "split", "composition", "chosen_slot_by_candidates"});
  const std::string title = "Chosen slot by number of candidates (share of records)";
  if (!c) return Figure("chosen-slot", title, "not-run", "", "");
  std::vector<std::string> cats;
  std::vector<double> shares, expected;
  std::vector<std::pair<std::string, std::vector<std::string>>> rows;
  for (auto it = c->begin(); it != c->end(); ++it) {
    double total = 0;
    for (const auto& v : it.value()) total += v.get<double>();
    const size_t b = it.value().size();
    for (size_t k = 0; k < b; ++k) {
      double share = total > 0 ? it.value()[k].get<double>() / total : 0;
      cats.push_back("B" + it.key() + " s" + std::to_string(k + 1));
      shares.push_back(share);
      expected.push_back(1.0 / static_cast<double>(b));
      rows.push_back({"", {"B = " + Esc(it.key()), std::to_string(k + 1), Esc(Fmt(it.value()[k].get<double>())),
                           Num(100 * share, 1) + "%", Num(100.0 / static_cast<double>(b), 1) + "%"}});
    }
  }
  if (cats.empty()) return Figure("chosen-slot", title, "empty", "no record with a single chosen answer", "");
  return Figure("chosen-slot", title, "data",
                Grouped(cats, {Series{"share chosen", shares, ColourOf("measure")}}, true, "share of records", expected),
                "Kept records with a single best answer (pairwise chosen/rejected layouts have no slot). The dashed "
                "line is 1/B, the share each slot holds without position bias. Bars: B = candidates, s = slot.",
                Table("", {"candidates", "slot", "records", "share", "expected"}, rows));
}

std::string LengthChart(const Json& s) {
  const Json* h = FindPath(s, {"stages", "split", "composition", "candidate_chars_histogram", "bins"});
  const std::string title = "Answer length, chosen vs other answers (code points, share per group)";
  if (!h) return Figure("lengths", title, "not-run", "", "");
  if (h->empty()) return Figure("lengths", title, "empty", "no answers", "");
  double tc = 0, tr = 0;
  for (const auto& b : *h) {
    tc += D(b, "chosen");
    tr += D(b, "rejected");
  }
  std::vector<std::string> cats;
  Series ch{"chosen", {}, ColourOf("measure")}, re{"other answers", {}, ColourOf("reference")};
  std::vector<std::pair<std::string, std::vector<std::string>>> rows;
  for (const auto& b : *h) {
    std::string bin = Plain(b["from"]) + "–" + Fmt(D(b, "to") - 1);
    cats.push_back(bin);
    ch.values.push_back(tc > 0 ? D(b, "chosen") / tc : 0);
    re.values.push_back(tr > 0 ? D(b, "rejected") / tr : 0);
    rows.push_back({"", {Esc(bin), Esc(Fmt(D(b, "chosen"))), Num(100 * ch.values.back(), 1) + "%",
                         Esc(Fmt(D(b, "rejected"))), Num(100 * re.values.back(), 1) + "%"}});
  }
  return Figure("lengths", title, "data", Grouped(cats, {ch, re}, true, "share of answers"),
                "Bins double in width. A chosen distribution shifted right of the others suggests a length preference.",
                Table("", {"code points", "chosen", "share", "other answers", "share"}, rows));
}

// Test families with groups (stages.bias.<section>.<key>.groups).
struct Family {
  const char* test;
  const char* kind;
  const char* section;  // under stages.bias: "position" or "length"
  const char* key;      // "by_annotator" or "by_source"
};

std::string ReviewSection(const Json& s) {
  const Json* bias = FindPath(s, {"stages", "bias"});
  std::string o;
  if (!bias) {
    return Section("review", "What should a reviewer look at?",
                   "<p class=\"missing\" data-chart=\"bias\">stage not run: no position or length tests, no shortcut "
                   "audit</p>\n");
  }
  const std::string correction = bias->contains("correction") ? Str((*bias)["correction"]) : "the plan's correction";
  o += "<p>Each family of tests is corrected for multiple testing (" + Esc(correction) + ", alpha " +
       Esc(Plain(V(*bias, "alpha"))) +
       "); \"flagged\" means the adjusted p is below alpha. Groups with fewer than " +
       Esc(Plain(V(*bias, "min_group_records"))) + " records are not tested.</p>\n";
  // Flagged annotators and sources, every family.
  const Family families[] = {
      {"position", "annotator", "position", "by_annotator"},
      {"position", "source", "position", "by_source"},
      {"length", "annotator", "length", "by_annotator"},
      {"length", "source", "length", "by_source"},
  };
  std::vector<std::pair<std::string, std::vector<std::string>>> rows;
  std::string tested;
  for (const auto& f : families) {
    const Json* fam = FindPath(*bias, {f.section, f.key});
    if (!fam) continue;
    tested += std::string(tested.empty() ? "" : "; ") + f.test + " by " + f.kind + ": " +
              Plain(V(*fam, "groups_tested")) + " groups tested";
    if (!fam->contains("groups") || !(*fam)["groups"].is_array()) continue;
    for (const auto& g : (*fam)["groups"]) {
      if (!True(g, "significant")) continue;
      const std::string name = Str(g.value(f.kind, Json("?")));
      std::string effect;
      if (g.contains("chosen_slot_shares") && g["chosen_slot_shares"].is_array()) {
        for (size_t k = 0; k < g["chosen_slot_shares"].size(); ++k) {
          effect += (k ? " / " : "") + Num(100 * g["chosen_slot_shares"][k].get<double>(), 0) + "%";
        }
        effect = "chosen slot shares " + effect;
      } else if (g.contains("chosen_longer_share")) {
        effect = "chosen answer longer in " + Num(100 * D(g, "chosen_longer_share"), 1) + "%";
      }
      rows.push_back({Attr("data-test", f.test) + Attr("data-kind", f.kind) + Attr("data-group", name) +
                          Attr("data-candidates", g.contains("candidates") ? Raw(g["candidates"]) : "") +
                          Attr("data-p-adjusted", g.contains("p_adjusted") ? Raw(g["p_adjusted"]) : ""),
                      {Esc(f.test), Esc(f.kind), "<strong>" + Esc(name) + "</strong>",
                       g.contains("candidates") ? Esc(Plain(g["candidates"])) : "all", Esc(Plain(V(g, "records"))),
                       Esc(effect), Esc(FmtP(D(g, "p"))), "<strong>" + Esc(FmtP(D(g, "p_adjusted"))) + "</strong>"}});
    }
  }
  o += "<h3>Flagged annotators and sources</h3>\n";
  if (rows.empty()) {
    o += "<p id=\"flagged-none\">No annotator or source is flagged (" + Esc(tested) + ").</p>\n";
    o += Table("flagged", {"test", "group kind", "group", "candidates", "records", "effect", "p", "adjusted p"}, {});
  } else {
    o += Table("flagged", {"test", "group kind", "group", "candidates", "records", "effect", "p", "adjusted p"}, rows);
    o += "<p class=\"small\">" + Esc(tested) + ".</p>\n";
  }
  // Whole-data tests.
  std::vector<std::pair<std::string, std::vector<std::string>>> tests;
  if (const Json* by_b = FindPath(*bias, {"position", "by_candidates"}); by_b && by_b->is_array()) {
    for (const auto& t : *by_b) {
      tests.push_back({Attr("data-test", "position") + Attr("data-candidates", Raw(V(t, "candidates"))) +
                           Attr("data-p-adjusted", Raw(V(t, "p_adjusted"))),
                       {"position, B = " + Esc(Plain(V(t, "candidates"))), Esc(Str(V(t, "test"))),
                        Esc(Plain(V(t, "records"))), Esc(FmtP(D(t, "p"))), Esc(FmtP(D(t, "p_adjusted"))),
                        True(t, "significant") ? "<strong>flagged</strong>" : "no"}});
    }
  }
  for (const char* unit : {"words", "characters"}) {
    const Json* t = FindPath(*bias, {"length", unit});
    if (!t) continue;
    tests.push_back({Attr("data-test", std::string("length-") + unit) +
                         Attr("data-p-adjusted", Raw(V(*t, "p_adjusted"))),
                     {std::string("length in ") + unit + " (chosen longer in " +
                          Num(100 * D(*t, "chosen_longer_share"), 1) + "%)",
                      Esc(Str(V(*t, "test"))), Esc(Plain(V(*t, "records"))),
                      Esc(FmtP(D(*t, "p"))), Esc(FmtP(D(*t, "p_adjusted"))),
                      True(*t, "significant") ? "<strong>flagged</strong>" : "no"}});
  }
  o += "<h3>Position and length tests over all kept records</h3>\n";
  o += tests.empty() ? std::string("<p class=\"missing\">no tests had data</p>\n")
                     : Table("bias-tests", {"test", "method", "records", "p", "adjusted p", "result"}, tests) + "\n";
  if (const Json* rb = FindPath(*bias, {"position", "rebalance"}); rb && True(*rb, "enabled")) {
    o += "<p>Position rebalancing: " + Esc(Plain(*rb)) + "</p>\n";
  }
  o += "<div class=\"grid\">" + SlotChart(s) + LengthChart(s) + "</div>";
  // The shortcut audit, from whatever fields it reports.
  o += "<h3>Shortcut audit</h3>\n";
  if (const Json* sa = FindPath(*bias, {"shortcut_audit"}); sa && sa->is_object()) {
    const double acc = D(*sa, "heldout_accuracy", -1);
    double chance = D(*sa, "chance_accuracy", D(*sa, "chance", -1));
    if (chance < 0 && V(*sa, "chance").is_object()) chance = D(V(*sa, "chance"), "accuracy", -1);
    if (acc >= 0 && chance >= 0) {
      o += "<p id=\"shortcut-verdict\">A classifier that sees only surface features (length, lists, code, slot, …) "
           "picks the chosen answer with held-out accuracy <strong>" + Num(100 * acc, 1) + "%</strong> against " +
           Num(100 * chance, 1) + "% by chance" +
           (V(*sa, "p").is_number() ? " (p = " + FmtP(D(*sa, "p")) + ")" : std::string()) +
           (sa->contains("threshold") ? ", threshold " + Num(100 * D(*sa, "threshold"), 1) + "%" : std::string()) +
           ": " + (True(*sa, "flagged") ? "<strong>flagged</strong>" : "not flagged") + ".</p>\n";
    }
    o += "<details open><summary>Every figure of the audit</summary>" + FieldTable(*sa, "shortcut-audit") + "</details>\n";
  } else {
    o += "<p class=\"missing\">the audit did not run</p>\n";
  }
  return Section("review", "What should a reviewer look at?", o);
}

// ---------------------------------------------------------------- 4. leakage

std::string LeakageSection(const Json& s) {
  const std::string title = "Leakage per evaluation set and detector (records)";
  const Json* lk = FindPath(s, {"stages", "leakage"});
  if (!lk) return Section("leakage", "Leakage", Figure("leakage", title, "not-run", "", ""));
  std::string o;
  if (lk->contains("skipped")) o += "<p class=\"missing\">" + Esc(Str((*lk)["skipped"])) + "</p>\n";
  const Json* b = FindPath(*lk, {"by_set"});
  if (!b || !b->is_object() || b->empty()) {
    return Section("leakage", "Leakage", o + Figure("leakage", title, "empty", "no evaluation sets", ""));
  }
  std::vector<Row> bars;
  std::vector<std::pair<std::string, std::vector<std::string>>> rows;
  for (auto it = b->begin(); it != b->end(); ++it) {
    for (auto d = it.value().begin(); d != it.value().end(); ++d) {
      double n = D(d.value(), "records");
      bars.push_back({it.key() + " / " + d.key(), n, "", StageColour("leakage")});
      std::string ex;
      if (d.value().contains("examples") && d.value()["examples"].is_array() && !d.value()["examples"].empty()) {
        const Json& e = d.value()["examples"][0];
        ex = "record " + Str(V(e, "id")) + " ~ item " + Str(V(e, "eval_item"));
      }
      rows.push_back({Attr("data-set", it.key()) + Attr("data-detector", d.key()) + Attr("data-records", Raw(d.value().value("records", Json(0)))),
                      {Esc(it.key()), Esc(d.key()), Esc(Fmt(n)), Esc(Num(100 * D(d.value(), "rate"), 2)) + "%", Esc(ex)}});
    }
  }
  o += Figure("leakage", title, "data", HBars(bars),
              "A record counts once per detector and set. Records checked: " +
                  Plain(V(*lk, "records_checked")) +
                  "; matching any set: " + Plain(V(*lk, "contaminated_records")) + " (dropped " +
                  Plain(V(*lk, "dropped")) + ", flagged " + Plain(V(*lk, "flagged")) +
                  "). Examples name the record and the evaluation item, not the text.",
              Table("leakage-table", {"evaluation set", "detector", "records", "rate", "example"}, rows));
  return Section("leakage", "Leakage", o);
}

// ---------------------------------------------------------------- 5. clusters

std::string ClusterSection(const Json& s) {
  const std::string title = "Near-duplicate prompt clusters by size";
  const Json* nr = FindPath(s, {"stages", "near"});
  const Json* c = nr ? FindPath(*nr, {"cluster_sizes"}) : nullptr;
  std::string fig;
  if (!c) {
    fig = Figure("clusters", title, "not-run", "", "");
  } else {
    std::vector<Row> bars;
    std::vector<std::pair<std::string, std::vector<std::string>>> rows;
    for (auto it = c->begin(); it != c->end(); ++it) {
      double n = it.value().get<double>();
      bars.push_back({it.key() + " records", n, "", StageColour("near")});
      double size = std::atof(it.key().c_str());
      rows.push_back({Attr("data-size", it.key()) + Attr("data-clusters", Raw(it.value())),
                      {Esc(it.key()), Esc(Fmt(n)), Esc(Fmt(n * size))}});
    }
    if (bars.empty()) {
      fig = Figure("clusters", title, "empty", "no near-duplicate clusters found", "");
    } else {
      fig = Figure("clusters", title, "data", HBars(bars),
                   "Clusters: " + Plain(V(*nr, "clusters")) + ", records in them: " +
                       Plain(V(*nr, "records_in_clusters")) + ", largest: " +
                       Plain(V(*nr, "largest_cluster")) + ".",
                   Table("clusters-table", {"cluster size (records)", "clusters", "records"}, rows));
    }
  }
  return Section("clusters", "Near-duplicate clusters", fig);
}

// ---------------------------------------------------------------- 6. personal data

std::string PersonalSection(const Json& s) {
  const std::string title = "Personal-data findings by kind";
  const Json* sc = FindPath(s, {"stages", "screen"});
  const std::string caution = "<div class=\"caution\"><strong>Personal data.</strong> " + Esc(kPersonalDataCaution) + "</div>\n";
  if (!sc) return Section("personal-data", "Personal data", Figure("personal-data", title, "not-run", "", "") + caution);
  const Json* kinds = FindPath(*sc, {"by_kind"});
  if (!kinds) kinds = FindPath(*sc, {"by_rule"});
  const Json* examples = FindPath(s, {"examples", "personal_data"});
  std::vector<Row> bars;
  std::vector<std::pair<std::string, std::vector<std::string>>> rows;
  if (kinds && kinds->is_object()) {
    for (auto it = kinds->begin(); it != kinds->end(); ++it) {
      double n = it.value().is_number() ? it.value().get<double>() : D(it.value(), "findings");
      if (n <= 0) continue;
      std::string action = it.value().is_object() ? Str(it.value().value("action", Json(""))) : "";
      bars.push_back({it.key(), n, Fmt(n) + (action.empty() ? "" : " (" + action + ")"), StageColour("screen")});
      std::string ex;
      if (examples && examples->is_array()) {
        for (const auto& e : *examples) {
          if (Str(V(e, "kind")) != it.key()) continue;
          ex = "<code class=\"masked\">" + Esc(Str(V(e, "preview"))) + "</code> <span class=\"small\">" +
               Esc(Str(V(e, "input")) + " line " + Raw(V(e, "line")) + " " +
                   Str(V(e, "pointer"))) +
               "</span>";
          break;
        }
      }
      rows.push_back({Attr("data-kind", it.key()) + Attr("data-findings", Fmt(n)),
                      {"<code>" + Esc(it.key()) + "</code>", Esc(Fmt(n)), Esc(action), ex}});
    }
  }
  std::stable_sort(bars.begin(), bars.end(), [](const Row& a, const Row& b) { return a.value > b.value; });
  std::string fig =
      bars.empty()
          ? Figure("personal-data", title, "empty", "no findings", "")
          : Figure("personal-data", title, "data", HBars(bars),
                   "All screened records, before actions; the action is in brackets. Records with findings: " +
                       Plain(V(*sc, "records_with_findings")) +
                       "; by field: " + Plain(V(*sc, "by_field")) +
                       "; by action: " + Plain(V(*sc, "by_action")) + ".",
                   Table("personal-data-table", {"kind", "findings", "action", "example (masked: class#bytes)"}, rows));
  return Section("personal-data", "Personal data", fig + caution);
}

// ---------------------------------------------------------------- 7. splits

std::string SplitSection(const Json& s) {
  const std::string title = "Split sizes (records; group-aware)";
  const Json* sp = FindPath(s, {"stages", "split", "splits"});
  if (!sp) return Section("splits", "Splits and their group checks", Figure("splits", title, "not-run", "", ""));
  std::vector<Row> bars;
  std::vector<std::pair<std::string, std::vector<std::string>>> rows;
  for (const auto& e : *sp) {
    const std::string name = Str(e["name"]);
    bars.push_back({name, D(e, "records"),
                    Fmt(D(e, "records")) + " records, " + Num(100 * D(e, "share"), 1) + "% (target " +
                        Num(100 * D(e, "ratio"), 1) + "%), " + Fmt(D(e, "groups")) + " groups",
                    SplitColour(name)});
    rows.push_back({Attr("data-split", name) + Attr("data-records", Raw(V(e, "records"))),
                    {Swatch(SplitColour(name)) + Esc(name), Esc(Fmt(D(e, "records"))), Esc(Fmt(D(e, "groups"))),
                     Num(100 * D(e, "share"), 1) + "%", Num(100 * D(e, "ratio"), 1) + "%",
                     e.contains("within_3_sd") ? Esc(Plain(e["within_3_sd"])) : ""}});
  }
  std::string o = bars.empty() ? Figure("splits", title, "empty", "no splits", "")
                               : Figure("splits", title, "data", HBars(bars), "Whole groups go to one split.",
                                        Table("splits-table", {"split", "records", "groups", "share", "target", "within 3 sd"},
                                              rows));
  if (const Json* ch = FindPath(s, {"stages", "split", "checks"}); ch && ch->is_object() && !ch->empty()) {
    o += "<h3>Group checks</h3>\n" + FieldTable(*ch, "split-checks") + "\n";
  }
  if (const Json* tie = FindPath(s, {"stages", "split", "tie_by"})) {
    o += "<p class=\"small\">Records are tied into one group by: " + Esc(Plain(*tie)) + ".</p>\n";
  }
  return Section("splits", "Splits and their group checks", o);
}

// ---------------------------------------------------------------- other stages

// Stages this page has no section for (added later): their scalar figures.
std::string OtherStagesSection(const Json& s) {
  static const std::set<std::string> kKnown = {"exact", "near", "leakage", "screen", "bias", "split", "store"};
  const Json* st = FindPath(s, {"stages"});
  if (!st || !st->is_object()) return "";
  std::string o;
  for (auto it = st->begin(); it != st->end(); ++it) {
    if (kKnown.count(it.key()) || !it.value().is_object()) continue;
    Json scalars = Json::object();
    for (auto f = it.value().begin(); f != it.value().end(); ++f) {
      if (!f.value().is_structured()) scalars[f.key()] = f.value();
    }
    o += "<h3>" + Swatch(StageColour(it.key())) + "Stage " + Esc(it.key()) + "</h3>\n" +
         FieldTable(scalars, "stage-" + it.key()) + "\n";
  }
  return o.empty() ? "" : Section("other-stages", "Other stages", o);
}

// ---------------------------------------------------------------- store only

std::string BatchTable(const Json& whole) {
  const Json* bs = FindPath(whole, {"batches"});
  std::string o;
  if (!bs || bs->empty()) return Section("batches", "Batches", "<p class=\"missing\">no batches</p>\n");
  std::vector<std::pair<std::string, std::vector<std::string>>> rows;
  auto num = [](const Json& b, const char* k) {
    return b.contains(k) && b[k].is_number() ? Fmt(b[k].get<double>()) : std::string("?");
  };
  for (const auto& b : *bs) {
    std::string conflicts = num(b, "group_conflict_components") + " (" +
                            Esc(b.contains("group_conflict_policy") ? Str(b["group_conflict_policy"]) : "reject") + ": " +
                            num(b, "store_group_conflicts") + " rejected, " + num(b, "records_joined_first") + " joined)";
    std::string digests = "plan <code>" + Esc(b.contains("plan_sha256") ? Str(b["plan_sha256"]) : "") + "</code>";
    if (b.contains("inputs") && b["inputs"].is_array()) {
      for (const auto& in : b["inputs"]) {
        digests += "<br>" + Esc(in.contains("name") ? Str(in["name"]) : "?") + " <code>" +
                   Esc(in.contains("sha256") ? Str(in["sha256"]) : "") + "</code>";
      }
    }
    rows.push_back({"", {num(b, "batch"), Esc(b.contains("added_at") ? Str(b["added_at"]) : ""), num(b, "records_in"),
                         num(b, "kept"), num(b, "rejected"), conflicts, "<span class=\"small\">" + digests + "</span>"}});
  }
  o += "<div class=\"batches\">" +
       Table("batches-table", {"batch", "added at", "records", "kept", "rejected", "group conflicts", "digests (SHA-256)"}, rows) +
       "</div>\n";
  if (const Json* ev = FindPath(whole, {"evaluation_sets", "note"})) o += "<p class=\"small\">Evaluation sets: " + Esc(Str(*ev)) + ".</p>\n";
  return Section("batches", "Batches", o);
}

// ---------------------------------------------------------------- the page

// The sections of each report, in order. A stage that adds a section of its own
// adds a row here (and its colour in report/palette.cc).
struct ReportSection {
  const char* id;
  std::string (*render)(const Json& summary);
};

const std::vector<ReportSection>& RunSections() {
  static const std::vector<ReportSection> k = {
      {"gate", GateSection},         {"removed", RemovedSection}, {"review", ReviewSection},
      {"leakage", LeakageSection},   {"clusters", ClusterSection}, {"personal-data", PersonalSection},
      {"splits", SplitSection},      {"other-stages", OtherStagesSection},
  };
  return k;
}

std::string StoreOnlyNote(const Json&) {
  return "<p class=\"small\" id=\"per-batch\">Per batch only (each batch's report.html): rejected-record examples, "
         "bias tests and flagged annotators, the shortcut audit, chosen slot, answer lengths, leakage per evaluation "
         "set, personal data by kind.</p>\n";
}

std::string StoreBatches(const Json& s) {
  const Json* whole = FindPath(s, {"whole_store"});
  return whole ? BatchTable(*whole) : "";
}

const std::vector<ReportSection>& StoreSections() {
  static const std::vector<ReportSection> k = {
      {"gate", GateSection},       {"removed", RemovedSection}, {"per-batch", StoreOnlyNote},
      {"clusters", ClusterSection}, {"splits", SplitSection},    {"batches", StoreBatches},
  };
  return k;
}

// The palette legend: the colours this page uses, each with its one meaning.
std::string Legend(const Json& s, bool whole) {
  std::set<std::string> stages;
  if (const Json* rb = FindPath(s, {"rejects_by_stage"})) {
    for (const auto& r : *rb) stages.insert("stage:" + Str(r["stage"]));
  }
  for (const char* st : {"near", "leakage", "screen"}) {
    if (FindPath(s, {"stages", st})) stages.insert(std::string("stage:") + st);
  }
  std::string o = "<p class=\"legend\" id=\"legend\"><span class=\"small\">Colours (the same in every chart):</span> ";
  for (const auto& c : Palette()) {
    const std::string m = c.meaning;
    bool used = m == "kept" || m == "rejected" || stages.count(m) || (m == "measure") ||
                (m == "reference" && !whole) || (m.rfind("split:", 0) == 0 && FindPath(s, {"stages", "split"}));
    if (!used) continue;
    std::string label = m.find(':') == std::string::npos ? m : m.substr(m.find(':') + 1);
    if (m.rfind("stage:", 0) == 0) label = "stage " + label;
    o += "<span class=\"key\"" + Attr("data-meaning", m) + Attr("title", c.note) + ">" + Swatch(c.hex) + Esc(label) +
         "</span> ";
  }
  return o + "</p>\n";
}

const char* kStyle = R"CSS(
:root{--ink:#1d232b;--muted:#5c6670;--line:#d9dee3;--paper:#fff;--tint:#f4f6f8}
*{box-sizing:border-box}
body{margin:0;background:var(--tint);color:var(--ink);font:15px/1.5 system-ui,-apple-system,"Segoe UI",Roboto,"Helvetica Neue",Arial,sans-serif}
main{max-width:980px;margin:0 auto;padding:24px 28px 48px;background:var(--paper);min-height:100vh}
h1{font-size:26px;margin:0 0 4px}h2{font-size:20px;margin:32px 0 10px;border-bottom:1px solid var(--line);padding-bottom:4px}h3{font-size:16px;margin:16px 0 8px}
.sub{color:var(--muted);margin:0 0 12px}
.gate{border:2px solid var(--line);border-radius:8px;padding:12px 16px;margin:12px 0 20px}
.gate h2{margin:0 0 8px;font-size:22px;border:0}
.gate.pass{border-color:#3d8b4f;background:#f1f8f2}.gate.pass h2{color:#2d6d3c}
.gate.fail{border-color:#b33a3a;background:#fcf2f2}.gate.fail h2{color:#9b2c2c}
.gate.other{border-color:#b8922e;background:#fbf7ec}.gate.other h2{color:#7d6217}
table{border-collapse:collapse;width:100%;font-size:14px;margin:6px 0}
th,td{text-align:left;padding:4px 8px;border-bottom:1px solid var(--line);vertical-align:top}
th{font-weight:600;color:var(--muted)}
#rejects td:first-child{white-space:nowrap}
td table{font-size:12px;margin:0}
tr.bad td:last-child{color:#9b2c2c}tr.ok td:last-child{color:#2d6d3c}tr.na td:last-child{color:#7d6217}
.small{font-size:12px;color:var(--muted)}
.batches code{word-break:break-all}
code.masked{background:var(--tint);padding:0 3px;border-radius:3px}
.sw{display:inline-block;width:11px;height:11px;border-radius:2px;margin-right:5px;vertical-align:-1px;border:1px solid rgba(0,0,0,.25)}
.legend .key{margin-right:10px;white-space:nowrap;font-size:13px}
.grid{display:grid;grid-template-columns:1fr;gap:16px}
figure.chart{margin:8px 0;border:1px solid var(--line);border-radius:8px;padding:12px 14px;break-inside:avoid;page-break-inside:avoid}
figcaption{font-size:13px;color:var(--muted);margin-top:4px}
.equiv{margin-top:6px;font-size:13px}
.missing{color:var(--muted);font-style:italic;margin:8px 0}
details summary{cursor:pointer;color:var(--muted);font-size:13px}
svg text{font:12px system-ui,-apple-system,"Segoe UI",Roboto,Arial,sans-serif;fill:var(--ink)}
svg .tick{fill:var(--muted);font-size:11px}svg .val{fill:var(--muted)}
svg .grid{stroke:#eceff2}svg .axis{stroke:#9aa3ab}svg .expected{stroke-dasharray:4 3;stroke-width:1.5}
.caution{border-left:4px solid #b8922e;background:#fbf7ec;padding:8px 12px;margin:16px 0;font-size:14px}
dl.facts{display:grid;grid-template-columns:max-content 1fr;gap:2px 16px;font-size:14px}dl.facts dt{color:var(--muted)}dl.facts dd{margin:0}
output#self-check{display:block;font-size:11px;color:var(--muted);margin-top:24px}
@media print{body{background:#fff;font-size:12px}main{padding:0;max-width:none}.gate,table,tr{break-inside:avoid}
 h2,h3{break-after:avoid}a{color:inherit;text-decoration:none}details>summary{display:none}
 .sw,rect,.gate{-webkit-print-color-adjust:exact;print-color-adjust:exact}output#self-check{display:none}}
)CSS";

// Marks each chart as checked; writes a verdict the browser test reads.
const char* kSelfCheck = R"JS(
window.addEventListener('load', function () {
  var figs = document.querySelectorAll('figure.chart'), bad = [], withData = 0;
  figs.forEach(function (f) {
    var marks = f.querySelectorAll('svg .mark').length, state = f.getAttribute('data-state');
    f.setAttribute('data-marks', String(marks));
    if (state === 'data') {
      withData++;
      if (marks === 0) bad.push(f.getAttribute('data-chart'));
      if (!f.querySelector('.equiv table')) bad.push(f.getAttribute('data-chart') + ' (no table)');
    }
  });
  var out = document.getElementById('self-check');
  out.textContent = (bad.length ? 'FAIL: ' + bad.join(', ') : 'OK') +
      ' (' + figs.length + ' charts, ' + withData + ' with data)';
  out.setAttribute('data-verdict', bad.length ? 'fail' : 'ok');
});
)JS";

}  // namespace

std::string RenderHtmlReport(const Json& s, const Json& sheet) {
  std::string name = sheet.contains("dataset_name") ? Str(sheet["dataset_name"]) : "not provided";
  const Json* whole = FindPath(s, {"whole_store"});  // a summary over a whole store (docs/store.md)
  const std::string kind = whole ? "prefsift store report" : "prefsift report";
  std::string h = "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
                  "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
                  "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'; "
                  "script-src 'unsafe-inline'; img-src data:\">"
                  "<title>" + kind + ": " + Esc(name) + "</title><style>" + kStyle + "</style></head>\n<body><main>\n";
  h += "<h1>" + kind + "</h1><p class=\"sub\">Dataset: " + Esc(name);
  if (whole && whole->contains("scope")) h += " &middot; " + Esc(Str((*whole)["scope"]));
  if (const Json* v = FindPath(s, {"tool", "version"})) h += " &middot; prefsift " + Esc(Str(*v));
  if (const Json* r = FindPath(s, {"tool", "revision"})) h += " (" + Esc(Str(*r)) + ")";
  h += "</p>\n<dl class=\"facts\">";
  if (const Json* t = FindPath(s, {"provenance", "time"})) {
    h += "<dt>" + std::string(whole ? "written" : "run started") + "</dt><dd id=\"run-time\">" +
         Esc(Str(V(*t, "utc"))) + " <span class=\"small\">(" + Esc(Str(V(*t, "source"))) +
         ")</span></dd>";
    if (t->contains("duration_seconds")) {
      h += "<dt>duration</dt><dd id=\"run-duration\">" + Num(D(*t, "duration_seconds"), 1) + " s</dd>";
    }
  }
  if (const Json* l = FindPath(s, {"ledger"})) {
    h += "<dt>records read</dt><dd>" + Fmt(D(*l, "records_in")) + "</dd><dt>kept</dt><dd id=\"kept\">" +
         Fmt(D(*l, "kept")) + "</dd><dt>rejected</dt><dd id=\"rejected\">" + Fmt(D(*l, "rejected")) + "</dd>";
  }
  if (const Json* c = whole ? FindPath(*whole, {"content_sha256"}) : nullptr) {
    h += "<dt>store content SHA-256</dt><dd><code>" + Esc(Str(*c)) + "</code></dd>";
  }
  if (const Json* p = FindPath(s, {"settings", "plan_sha256"})) h += "<dt>plan SHA-256</dt><dd><code>" + Esc(Str(*p)) + "</code></dd>";
  if (const Json* sd = FindPath(s, {"settings", "seed"})) h += "<dt>seed</dt><dd>" + Esc(Str(*sd)) + "</dd>";
  h += "</dl>\n";
  h += Legend(s, whole != nullptr);
  for (const auto& sec : whole ? StoreSections() : RunSections()) h += sec.render(s);
  if (!whole) h += AnnotatorsSection(s);  // report/annotator_facts.h
  if (whole) h += "<div class=\"caution\"><strong>Personal data.</strong> " + Esc(kPersonalDataCaution) + "</div>\n";
  if (whole) {
    h += "<p class=\"small\">Details: store-summary.json (every figure), datasheet.md (the seven datasheet sections and "
         "every batch's digests), each batch's output folder (rejects.jsonl, store_conflicts.jsonl).</p>\n";
  } else {
    h += "<p class=\"small\">Details: summary.json (every figure), datasheet.md (the seven datasheet sections and file "
         "digests), rejects.jsonl (every rejected record with its reason).</p>\n";
  }
  h += "<output id=\"self-check\" data-verdict=\"pending\">charts not checked yet</output>\n";
  h += std::string("<script>") + kSelfCheck + "</script>\n</main></body></html>\n";
  return h;
}

}  // namespace prefsift
