// report.html; see html_report.h and docs/report.md.
#include "report/html_report.h"

#include "report/annotator_facts.h"
#include "report/json_find.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

#include "report/datasheet.h"

namespace prefsift {

using Json = nlohmann::ordered_json;

namespace {

const Json* Find(const Json& j, std::initializer_list<const char*> path) { return FindPath(j, path); }

std::string Esc(const std::string& s) {
  std::string o;
  for (char c : s) {
    switch (c) {
      case '&': o += "&amp;"; break;
      case '<': o += "&lt;"; break;
      case '>': o += "&gt;"; break;
      case '"': o += "&quot;"; break;
      default: o += c;
    }
  }
  return o;
}

std::string Str(const Json& j) { return j.is_string() ? j.get<std::string>() : j.dump(); }

std::string Num(double v, int digits = 0) {
  char b[48];
  std::snprintf(b, sizeof b, "%.*f", digits, v);
  return b;
}

std::string Fmt(double v) {
  if (v == std::floor(v) && std::fabs(v) < 1e15) {
    // thousands separators
    std::string s = Num(std::fabs(v)), o;
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

const char* kColors[] = {"#2f5d8a", "#c2702e", "#5b8c4a", "#8a4f7d", "#b8a030", "#4a8c8c"};

struct Row {
  std::string label;
  double value = 0;
  std::string note;  // shown right of the bar; default: the value
  int color = 0;
};

// Horizontal bars, one per row.
std::string HBars(const std::vector<Row>& rows) {
  double max = 0;
  for (const auto& r : rows) max = std::max(max, r.value);
  const int label_w = 220, bar_w = 330, row_h = 24, w = label_w + bar_w + 330;
  const int h = static_cast<int>(rows.size()) * row_h + 8;
  std::string s = "<svg viewBox=\"0 0 " + std::to_string(w) + " " + std::to_string(h) +
                  "\" width=\"100%\" role=\"img\" preserveAspectRatio=\"xMinYMin meet\">";
  for (size_t i = 0; i < rows.size(); ++i) {
    const Row& r = rows[i];
    int y = static_cast<int>(i) * row_h + 4;
    double len = max > 0 ? r.value / max * bar_w : 0;
    if (r.value > 0 && len < 2) len = 2;
    s += "<text x=\"" + std::to_string(label_w - 8) + "\" y=\"" + std::to_string(y + 16) +
         "\" text-anchor=\"end\" class=\"lbl\">" + Esc(r.label) + "</text>";
    s += "<rect class=\"mark\" x=\"" + std::to_string(label_w) + "\" y=\"" + std::to_string(y + 3) + "\" width=\"" +
         Num(len, 1) + "\" height=\"" + std::to_string(row_h - 8) + "\" fill=\"" + kColors[r.color % 6] +
         "\"><title>" + Esc(r.label + ": " + Fmt(r.value)) + "</title></rect>";
    s += "<text x=\"" + Num(label_w + len + 6, 1) + "\" y=\"" + std::to_string(y + 16) + "\" class=\"val\">" +
         Esc(r.note.empty() ? Fmt(r.value) : r.note) + "</text>";
  }
  return s + "</svg>";
}

struct Series {
  std::string name;
  std::vector<double> values;  // one per category
};

// Vertical grouped bars: categories along x, one bar per series in each.
std::string Grouped(const std::vector<std::string>& cats, const std::vector<Series>& series, bool percent,
                    const std::string& y_title) {
  double max = 0;
  for (const auto& se : series) {
    for (double v : se.values) max = std::max(max, v);
  }
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
  std::string s = "<svg viewBox=\"0 0 " + std::to_string(w) + " " + std::to_string(h) +
                  "\" width=\"" + std::to_string(std::min(100, w * 100 / 800)) +
                  "%\" role=\"img\" preserveAspectRatio=\"xMinYMin meet\">";
  // legend
  int lx = left;
  for (size_t k = 0; k < series.size(); ++k) {
    s += "<rect x=\"" + std::to_string(lx) + "\" y=\"6\" width=\"12\" height=\"12\" fill=\"" + kColors[k % 6] + "\"/>";
    s += "<text x=\"" + std::to_string(lx + 16) + "\" y=\"16\" class=\"lbl\">" + Esc(series[k].name) + "</text>";
    lx += 24 + 8 * static_cast<int>(series[k].name.size()) + 14;
  }
  // axis and grid
  for (int t = 0; t <= 4; ++t) {
    double v = max * t / 4;
    int y = top + plot_h - plot_h * t / 4;
    s += "<line x1=\"" + std::to_string(left) + "\" x2=\"" + std::to_string(left + plot_w) + "\" y1=\"" +
         std::to_string(y) + "\" y2=\"" + std::to_string(y) + "\" class=\"grid\"/>";
    s += "<text x=\"" + std::to_string(left - 6) + "\" y=\"" + std::to_string(y + 4) + "\" text-anchor=\"end\" class=\"tick\">" +
         (percent ? Num(100 * v, v < 0.1 && v > 0 ? 1 : 0) + "%" : Fmt(v)) + "</text>";
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
           Num(std::max(1.0, bw - 2), 1) + "\" height=\"" + Num(bh, 1) + "\" fill=\"" + kColors[k % 6] + "\"><title>" +
           Esc(series[k].name + ", " + cats[c] + ": " + (percent ? Num(100 * v, 1) + "%" : Fmt(v))) + "</title></rect>";
    }
    s += "<text x=\"" + std::to_string(gx + (group_w - 10) / 2) + "\" y=\"" + std::to_string(top + plot_h + 16) +
         "\" text-anchor=\"middle\" class=\"tick\">" + Esc(cats[c]) + "</text>";
  }
  s += "<line x1=\"" + std::to_string(left) + "\" x2=\"" + std::to_string(left + plot_w) + "\" y1=\"" +
       std::to_string(top + plot_h) + "\" y2=\"" + std::to_string(top + plot_h) + "\" class=\"axis\"/>";
  return s + "</svg>";
}

std::string Figure(const std::string& name, const std::string& title, const std::string& state, const std::string& body,
                   const std::string& caption) {
  std::string s = "<figure class=\"chart\" data-chart=\"" + name + "\" data-state=\"" + state + "\"><h3>" + Esc(title) + "</h3>";
  if (state == "not-run") s += "<p class=\"missing\">stage not run</p>";
  else if (state == "empty") s += "<p class=\"missing\">" + Esc(body) + "</p>";
  else s += body;
  if (!caption.empty()) s += "<figcaption>" + Esc(caption) + "</figcaption>";
  return s + "</figure>\n";
}

std::string LedgerChart(const Json& s) {
  const Json* l = Find(s, {"ledger"});
  if (!l) return Figure("ledger", "Ledger: records in, rejected by stage, kept", "not-run", "", "");
  std::vector<Row> rows;
  rows.push_back({"records read", (*l)["records_in"].get<double>(), "", 0});
  if (const Json* rb = Find(s, {"rejects_by_stage"})) {
    for (const auto& r : *rb) rows.push_back({"rejected by " + Str(r["stage"]), r["rejected"].get<double>(), "", 1});
  }
  rows.push_back({"kept", (*l)["kept"].get<double>(), "", 2});
  return Figure("ledger", "Ledger: records in, rejected by stage, kept", "data", HBars(rows),
                std::string("Every input record ends in exactly one output; the ledger ") +
                    ((*l)["balanced"].get<bool>() ? "balances." : "does NOT balance."));
}

std::string SlotChart(const Json& s) {
  const Json* c = Find(s, {"stages", "split", "composition", "chosen_slot_by_candidates"});
  const std::string title = "Chosen slot by number of candidates (share of records)";
  if (!c) return Figure("chosen-slot", title, "not-run", "", "");
  size_t max_b = 0;
  for (auto it = c->begin(); it != c->end(); ++it) max_b = std::max(max_b, it.value().size());
  if (max_b == 0) return Figure("chosen-slot", title, "empty", "no record with a single chosen answer", "");
  std::vector<std::string> cats;
  for (size_t k = 0; k < max_b; ++k) cats.push_back("slot " + std::to_string(k + 1));
  std::vector<Series> series;
  for (auto it = c->begin(); it != c->end(); ++it) {
    double total = 0;
    for (const auto& v : it.value()) total += v.get<double>();
    Series se{"B = " + it.key(), {}};
    for (size_t k = 0; k < max_b; ++k) se.values.push_back(k < it.value().size() && total > 0 ? it.value()[k].get<double>() / total : 0);
    series.push_back(std::move(se));
  }
  return Figure("chosen-slot", title, "data", Grouped(cats, series, true, "share of records"),
                "Kept records with a single best answer (pairwise chosen/rejected layouts have no slot and are left out); without position bias each slot holds about 1/B.");
}

std::string LengthChart(const Json& s) {
  const Json* h = Find(s, {"stages", "split", "composition", "candidate_chars_histogram", "bins"});
  const std::string title = "Answer length, chosen vs other answers (code points, share per group)";
  if (!h) return Figure("lengths", title, "not-run", "", "");
  if (h->empty()) return Figure("lengths", title, "empty", "no answers", "");
  double tc = 0, tr = 0;
  for (const auto& b : *h) {
    tc += b["chosen"].get<double>();
    tr += b["rejected"].get<double>();
  }
  std::vector<std::string> cats;
  Series ch{"chosen", {}}, re{"other answers", {}};
  for (const auto& b : *h) {
    cats.push_back(Str(b["from"]) + "–" + Fmt(b["to"].get<double>() - 1));
    ch.values.push_back(tc > 0 ? b["chosen"].get<double>() / tc : 0);
    re.values.push_back(tr > 0 ? b["rejected"].get<double>() / tr : 0);
  }
  return Figure("lengths", title, "data", Grouped(cats, {ch, re}, true, "share of answers"),
                "Bins double in width. A chosen distribution shifted right of the others suggests a length preference.");
}

std::string ClusterChart(const Json& s) {
  const Json* c = Find(s, {"stages", "near", "cluster_sizes"});
  const std::string title = "Near-duplicate prompt clusters by size";
  if (!c) return Figure("clusters", title, "not-run", "", "");
  std::vector<Row> rows;
  for (auto it = c->begin(); it != c->end(); ++it) rows.push_back({it.key() + " records", it.value().get<double>(), "", 3});
  if (rows.empty()) return Figure("clusters", title, "empty", "no near-duplicate clusters found", "");
  return Figure("clusters", title, "data", HBars(rows), "Number of clusters of each size.");
}

std::string PersonalChart(const Json& s) {
  const Json* r = Find(s, {"stages", "screen", "by_rule"});
  const std::string title = "Personal-data findings by rule";
  if (!r) return Figure("personal-data", title, "not-run", "", "");
  std::vector<Row> rows;
  for (auto it = r->begin(); it != r->end(); ++it) {
    double n = it.value().contains("findings") ? it.value()["findings"].get<double>() : 0;
    if (n > 0) rows.push_back({it.key(), n, Fmt(n) + " (" + Str(it.value().value("action", Json("?"))) + ")", 1});
  }
  std::stable_sort(rows.begin(), rows.end(), [](const Row& a, const Row& b) { return a.value > b.value; });
  if (rows.empty()) return Figure("personal-data", title, "empty", "no findings", "");
  return Figure("personal-data", title, "data", HBars(rows), "All records screened, before actions; the action is in brackets.");
}

std::string LeakChart(const Json& s) {
  const Json* b = Find(s, {"stages", "leakage", "by_set"});
  const std::string title = "Records matching each evaluation set, by detector";
  if (!b) return Figure("leakage", title, "not-run", "", "");
  if (b->empty()) return Figure("leakage", title, "empty", "no evaluation sets", "");
  std::vector<std::string> cats;
  std::vector<Series> series;
  for (auto it = b->begin(); it != b->end(); ++it) {
    cats.push_back(it.key());
    for (auto d = it.value().begin(); d != it.value().end(); ++d) {
      auto se = std::find_if(series.begin(), series.end(), [&](const Series& x) { return x.name == d.key(); });
      if (se == series.end()) {
        series.push_back(Series{d.key(), {}});
        se = series.end() - 1;
      }
      se->values.resize(cats.size() - 1, 0);
      se->values.push_back(d.value().contains("records") ? d.value()["records"].get<double>() : 0);
    }
  }
  return Figure("leakage", title, "data", Grouped(cats, series, false, "records"),
                "A record counts once per detector and set.");
}

std::string SplitChart(const Json& s) {
  const Json* sp = Find(s, {"stages", "split", "splits"});
  const std::string title = "Split sizes (records; group-aware)";
  if (!sp) return Figure("splits", title, "not-run", "", "");
  std::vector<Row> rows;
  int k = 0;
  for (const auto& e : *sp) {
    rows.push_back({Str(e["name"]), e["records"].get<double>(),
                    Fmt(e["records"].get<double>()) + " records, " + Num(100 * e["share"].get<double>(), 1) +
                        "% (target " + Num(100 * e["ratio"].get<double>(), 1) + "%), " + Fmt(e["groups"].get<double>()) +
                        " groups",
                    k++});
  }
  if (rows.empty()) return Figure("splits", title, "empty", "no splits", "");
  const Json* ch = Find(s, {"stages", "split", "checks"});
  std::string cap = "Whole groups go to one split.";
  if (ch) {
    cap += " Groups spanning two splits: " + Str((*ch)["groups_spanning_splits"]) +
           "; prompts split apart: " + Str((*ch)["prompts_split_apart"]) + ".";
  }
  return Figure("splits", title, "data", HBars(rows), cap);
}

std::string GateBanner(const Json& s) {
  const Json* g = Find(s, {"gate"});
  std::string verdict = g ? Str((*g)["verdict"]) : "not evaluated";
  std::string cls = verdict == "pass" ? "pass" : verdict == "fail" ? "fail" : "other";
  std::string o = "<section class=\"gate " + cls + "\" id=\"gate\"><h2>Gate: " + Esc(verdict) + "</h2>";
  if (g && g->contains("note")) {
    o += "<p>" + Esc(Str((*g)["note"])) + "</p>";
  } else if (!g || (*g)["checks"].empty()) {
    o += "<p>The plan sets no gate checks.</p>";
  } else {
    o += "<table><thead><tr><th>check</th><th>scope</th><th>value</th><th>threshold</th><th>verdict</th></tr></thead><tbody>";
    for (const auto& c : (*g)["checks"]) {
      std::string v = Str(c["verdict"]);
      o += "<tr class=\"" + std::string(v == "pass" ? "ok" : v == "fail" ? "bad" : "na") + "\"><td>" + Esc(Str(c["check"])) +
           "<div class=\"small\">" + Esc(Str(c["measures"])) + "</div></td><td>" +
           Esc(c.contains("scope") ? Str(c["scope"]) : "") + "</td><td>" +
           (c["value"].is_null() ? "<span class=\"small\">" + Esc(Str(c.value("reason", Json("")))) + "</span>"
                                 : Esc(Fmt(c["value"].get<double>()))) +
           "</td><td>" + Esc(Str(c["threshold"])) + "</td><td>" + Esc(v) + "</td></tr>";
    }
    o += "</tbody></table>";
  }
  return o + "</section>\n";
}

// A whole store (docs/store.md): one row per batch with counts and digests.
std::string BatchTable(const Json& whole) {
  const Json* bs = Find(whole, {"batches"});
  std::string o = "<h2>Batches</h2>";
  if (!bs || bs->empty()) return o + "<p class=\"missing\">no batches</p>\n";
  o += "<table class=\"batches\"><thead><tr><th>batch</th><th>added at</th><th>records</th><th>kept</th><th>rejected</th>"
       "<th>group conflicts</th><th>digests (SHA-256)</th></tr></thead><tbody>";
  auto num = [](const Json& b, const char* k) {
    return b.contains(k) && b[k].is_number() ? Fmt(b[k].get<double>()) : std::string("?");
  };
  for (const auto& b : *bs) {
    std::string conflicts = num(b, "group_conflict_components") + " (" + Esc(b.contains("group_conflict_policy")
                                                                                ? Str(b["group_conflict_policy"]) : "reject") +
                            ": " + num(b, "store_group_conflicts") + " rejected, " + num(b, "records_joined_first") +
                            " joined)";
    std::string digests = "plan <code>" + Esc(b.contains("plan_sha256") ? Str(b["plan_sha256"]) : "") + "</code>";
    if (b.contains("inputs") && b["inputs"].is_array()) {
      for (const auto& in : b["inputs"]) {
        digests += "<br>" + Esc(in.contains("name") ? Str(in["name"]) : "?") + " <code>" +
                   Esc(in.contains("sha256") ? Str(in["sha256"]) : "") + "</code>";
      }
    }
    o += "<tr><td>" + num(b, "batch") + "</td><td>" + Esc(b.contains("added_at") ? Str(b["added_at"]) : "") + "</td><td>" +
         num(b, "records_in") + "</td><td>" + num(b, "kept") + "</td><td>" + num(b, "rejected") + "</td><td>" + conflicts +
         "</td><td class=\"small\">" + digests + "</td></tr>";
  }
  o += "</tbody></table>\n";
  if (const Json* ev = Find(whole, {"evaluation_sets", "note"})) o += "<p class=\"small\">Evaluation sets: " + Esc(Str(*ev)) + ".</p>\n";
  return o;
}

// Rejects by stage and reason (a whole store: the records are in each batch's rejects.jsonl).
std::string ReasonTable(const Json& s) {
  const Json* rb = Find(s, {"rejects_by_stage"});
  std::string o = "<h2>Rejects by reason</h2>";
  if (!rb || rb->empty()) return o + "<p class=\"missing\">no rejects</p>\n";
  o += "<table><thead><tr><th>stage</th><th>reason</th><th>records</th></tr></thead><tbody>";
  for (const auto& r : *rb) {
    if (!r.contains("by_reason") || !r["by_reason"].is_object()) continue;
    for (auto it = r["by_reason"].begin(); it != r["by_reason"].end(); ++it) {
      o += "<tr><td>" + Esc(Str(r["stage"])) + "</td><td><code>" + Esc(it.key()) + "</code></td><td>" +
           (it.value().is_number() ? Fmt(it.value().get<double>()) : Esc(Str(it.value()))) + "</td></tr>";
    }
  }
  return o + "</tbody></table>\n";
}

const char* kStyle = R"CSS(
:root{--ink:#1d232b;--muted:#5c6670;--line:#d9dee3;--paper:#fff;--tint:#f4f6f8}
*{box-sizing:border-box}
body{margin:0;background:var(--tint);color:var(--ink);font:15px/1.5 system-ui,-apple-system,"Segoe UI",Roboto,"Helvetica Neue",Arial,sans-serif}
main{max-width:980px;margin:0 auto;padding:24px 28px 48px;background:var(--paper);min-height:100vh}
h1{font-size:26px;margin:0 0 4px}h2{font-size:19px;margin:28px 0 10px}h3{font-size:16px;margin:0 0 8px}
.sub{color:var(--muted);margin:0 0 18px}
.gate{border:2px solid var(--line);border-radius:8px;padding:12px 16px;margin:12px 0 20px}
.gate h2{margin:0 0 8px;font-size:22px}
.gate.pass{border-color:#3d8b4f;background:#f1f8f2}.gate.pass h2{color:#2d6d3c}
.gate.fail{border-color:#b33a3a;background:#fcf2f2}.gate.fail h2{color:#9b2c2c}
.gate.other{border-color:#b8922e;background:#fbf7ec}.gate.other h2{color:#7d6217}
table{border-collapse:collapse;width:100%;font-size:14px}
th,td{text-align:left;padding:5px 8px;border-bottom:1px solid var(--line);vertical-align:top}
th{font-weight:600;color:var(--muted)}
tr.bad td:last-child{color:#9b2c2c;font-weight:600}tr.ok td:last-child{color:#2d6d3c;font-weight:600}
tr.na td:last-child{color:#7d6217}
.small{font-size:12px;color:var(--muted)}
table.batches code{word-break:break-all}
.grid-2{display:grid;grid-template-columns:1fr;gap:16px}
figure.chart{margin:0;border:1px solid var(--line);border-radius:8px;padding:12px 14px;break-inside:avoid;page-break-inside:avoid}
figcaption{font-size:13px;color:var(--muted);margin-top:4px}
.missing{color:var(--muted);font-style:italic;margin:8px 0}
svg text{font:12px system-ui,-apple-system,"Segoe UI",Roboto,Arial,sans-serif;fill:var(--ink)}
svg .tick{fill:var(--muted);font-size:11px}svg .val{fill:var(--muted)}
svg .grid{stroke:#eceff2}svg .axis{stroke:#9aa3ab}
.caution{border-left:4px solid #b8922e;background:#fbf7ec;padding:8px 12px;margin:16px 0;font-size:14px}
dl.facts{display:grid;grid-template-columns:max-content 1fr;gap:2px 16px;font-size:14px}dl.facts dt{color:var(--muted)}dl.facts dd{margin:0}
output#self-check{display:block;font-size:11px;color:var(--muted);margin-top:24px}
@media print{body{background:#fff}main{padding:0;max-width:none}.gate{break-inside:avoid}}
)CSS";

// Marks each chart as checked; writes a verdict the browser test reads.
const char* kSelfCheck = R"JS(
window.addEventListener('load', function () {
  var figs = document.querySelectorAll('figure.chart'), bad = [], withData = 0;
  figs.forEach(function (f) {
    var marks = f.querySelectorAll('svg .mark').length, state = f.getAttribute('data-state');
    f.setAttribute('data-marks', String(marks));
    if (state === 'data') { withData++; if (marks === 0) bad.push(f.getAttribute('data-chart')); }
  });
  var out = document.getElementById('self-check');
  out.textContent = (bad.length ? 'FAIL: no data marks in ' + bad.join(', ') : 'OK') +
      ' (' + figs.length + ' charts, ' + withData + ' with data)';
  out.setAttribute('data-verdict', bad.length ? 'fail' : 'ok');
});
)JS";

}  // namespace

std::string RenderHtmlReport(const Json& s, const Json& sheet) {
  std::string name = sheet.contains("dataset_name") ? Str(sheet["dataset_name"]) : "not provided";
  const Json* whole = Find(s, {"whole_store"});  // a summary over a whole store (docs/store.md)
  const std::string kind = whole ? "prefsift store report" : "prefsift report";
  std::string h = "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
                  "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
                  "<title>" + kind + ": " + Esc(name) + "</title><style>" + kStyle + "</style></head>\n<body><main>\n";
  h += "<h1>" + kind + "</h1><p class=\"sub\">Dataset: " + Esc(name);
  if (whole && whole->contains("scope")) h += " &middot; " + Esc(Str((*whole)["scope"]));
  if (const Json* t = Find(s, {"provenance", "time", "utc"})) h += " &middot; " + Esc(Str(*t));
  if (const Json* v = Find(s, {"tool", "version"})) h += " &middot; prefsift " + Esc(Str(*v));
  if (const Json* r = Find(s, {"tool", "revision"})) h += " (" + Esc(Str(*r)) + ")";
  h += "</p>\n";
  h += GateBanner(s);
  if (const Json* l = Find(s, {"ledger"})) {
    h += "<dl class=\"facts\"><dt>records read</dt><dd>" + Fmt((*l)["records_in"].get<double>()) +
         "</dd><dt>kept</dt><dd>" + Fmt((*l)["kept"].get<double>()) + "</dd><dt>rejected</dt><dd>" +
         Fmt((*l)["rejected"].get<double>()) +
         (whole ? " (reasons below; records in each batch's rejects.jsonl)</dd>" : " (reasons in rejects.jsonl)</dd>");
    if (const Json* c = whole ? Find(*whole, {"content_sha256"}) : nullptr) {
      h += "<dt>store content SHA-256</dt><dd><code>" + Esc(Str(*c)) + "</code></dd>";
    }
    if (const Json* p = Find(s, {"settings", "plan_sha256"})) h += "<dt>plan SHA-256</dt><dd><code>" + Esc(Str(*p)) + "</code></dd>";
    if (const Json* sd = Find(s, {"settings", "seed"})) h += "<dt>seed</dt><dd>" + Esc(Str(*sd)) + "</dd>";
    h += "</dl>\n";
  }
  h += "<h2>Charts</h2><div class=\"grid-2\">\n";
  if (whole) {
    // The store keeps facts, not text: answer slots, lengths, personal-data
    // findings and evaluation-set matches are charted in each batch's report.
    h += LedgerChart(s) + SplitChart(s) + ClusterChart(s);
    h += "</div>\n<p class=\"small\">Per batch only (each batch's report.html): chosen slot, answer lengths, "
         "personal-data findings by rule, evaluation-set matches.</p>\n";
    h += ReasonTable(s) + BatchTable(*whole);
  } else {
    h += LedgerChart(s) + SplitChart(s) + SlotChart(s) + LengthChart(s) + ClusterChart(s) + PersonalChart(s) + LeakChart(s);
    h += "</div>\n";
  }
  h += AnnotatorsSection(s);  // report/annotator_facts.h
  h += "<div class=\"caution\"><strong>Personal data.</strong> " + Esc(kPersonalDataCaution) + "</div>\n";
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
