// report.html read as a browser reads it: headless Chromium loads the page of
// the demo run and of a run whose gate fails in other ways, and the figures
// in the DOM after load (gate checks, reject counts, flagged groups, ledger)
// are compared with summary.json. Any console message or any request that
// leaves the file is a failure; two control pages show that both detectors
// fire. Skipped when /usr/bin/chromium is absent (scripts/install-deps.sh).
#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <map>
#include <regex>
#include <set>
#include <string>
#include <vector>

#include "e2e/e2e_helpers.h"

namespace prefsift::e2e {
namespace {

using Json = nlohmann::ordered_json;

struct Page {
  int exit = -1;
  std::string dom;                         // document after load (--dump-dom)
  std::vector<std::string> console;        // CONSOLE lines of the browser log
  std::vector<std::string> outside_urls;   // requests the page made beyond file:
};

// Requests in a Chromium net log (--log-net-log) that a page started: the
// browser's own background requests carry the initiator "not an origin".
std::vector<std::string> PageRequests(const std::string& netlog_path) {
  std::string text = ReadFile(netlog_path);
  while (!text.empty() && (text.back() == '\n' || text.back() == ',' || text.back() == ' ')) text.pop_back();
  if (text.empty()) return {"<no net log written>"};
  if (text.back() != '}') text += "]}";  // the log is closed only on a clean exit
  Json log = Json::parse(text, nullptr, false);
  if (!log.is_object() || !log.contains("constants") || !log.contains("events")) return {"<unreadable net log>"};
  const Json& types = log["constants"]["logEventTypes"];
  if (!types.contains("URL_REQUEST_START_JOB")) return {"<net log without request events>"};
  const int start_job = types["URL_REQUEST_START_JOB"].get<int>();
  std::vector<std::string> out;
  for (const auto& e : log["events"]) {
    if (!e.contains("type") || e["type"] != start_job || !e.contains("params")) continue;
    const Json& p = e["params"];
    std::string url = p.value("url", ""), initiator = p.value("initiator", "");
    if (initiator == "not an origin") continue;                 // the browser itself, not the page
    if (url.empty() || url.rfind("file:", 0) == 0 || url.rfind("data:", 0) == 0) continue;
    out.push_back(url);
  }
  return out;
}

Page Load(const std::string& html_path, const std::string& tag) {
  const std::string base = ::testing::TempDir() + "prefsift-dom-" + tag + "-" + std::to_string(::getpid());
  std::filesystem::remove_all(base);
  std::filesystem::create_directories(base + "/profile");
  const std::string flags =
      " --headless --no-sandbox --disable-gpu --disable-quic --no-first-run --disable-background-networking"
      " --disable-component-update --disable-sync --user-data-dir=" + base + "/profile" +
      " --log-net-log=" + base + "/netlog.json --enable-logging=stderr --v=0";
  const std::string url = "file://" + std::filesystem::absolute(html_path).string();
  Page page;
  // Chromium now and then gives no output on a loaded machine: one retry.
  for (int attempt = 0; attempt < 2 && page.dom.find("</html>") == std::string::npos; ++attempt) {
    page.exit = Shell("(timeout 90 /usr/bin/chromium" + flags + " --dump-dom " + url + " 2>" + base + "/log.txt)", &page.dom);
  }
  std::ifstream log(base + "/log.txt");
  for (std::string line; std::getline(log, line);) {
    if (line.find(":CONSOLE") != std::string::npos) page.console.push_back(line);
  }
  page.outside_urls = PageRequests(base + "/netlog.json");
  std::filesystem::remove_all(base);
  return page;
}

std::string Unescape(std::string s) {
  for (auto [from, to] : {std::pair{"&quot;", "\""}, std::pair{"&lt;", "<"}, std::pair{"&gt;", ">"},
                          std::pair{"&amp;", "&"}}) {
    for (size_t at; (at = s.find(from)) != std::string::npos;) s.replace(at, std::string(from).size(), to);
  }
  return s;
}

struct DomRow {
  std::map<std::string, std::string> attrs;  // data-* attributes
  std::vector<std::string> cells;            // text of each <td>, tags stripped
};

// The rows of the table with this id, as the browser serialised them.
std::vector<DomRow> TableRows(const std::string& dom, const std::string& id, bool* found) {
  std::vector<DomRow> rows;
  size_t at = dom.find("<table id=\"" + id + "\"");
  *found = at != std::string::npos;
  if (!*found) return rows;
  size_t body = dom.find("<tbody>", at), end = dom.find("</tbody>", at);
  const std::string t = dom.substr(body, end - body);
  static const std::regex row_re("<tr([^>]*)>([\\s\\S]*?)</tr>"), attr_re("(data-[a-z-]+)=\"([^\"]*)\""),
      cell_re("<td[^>]*>([\\s\\S]*?)</td>"), tag_re("<[^>]*>");
  for (std::sregex_iterator r(t.begin(), t.end(), row_re), e; r != e; ++r) {
    DomRow row;
    const std::string attrs = (*r)[1], inner = (*r)[2];
    for (std::sregex_iterator a(attrs.begin(), attrs.end(), attr_re); a != e; ++a) row.attrs[(*a)[1]] = Unescape((*a)[2]);
    for (std::sregex_iterator c(inner.begin(), inner.end(), cell_re); c != e; ++c) {
      row.cells.push_back(Unescape(std::regex_replace(std::string((*c)[1]), tag_re, "")));
    }
    rows.push_back(std::move(row));
  }
  return rows;
}

// "3,605" -> 3605 (the page prints counts with thousands separators).
double Count(std::string s) {
  s.erase(std::remove(s.begin(), s.end(), ','), s.end());
  return std::strtod(s.c_str(), nullptr);
}

std::string Attr(const std::string& dom, const std::string& element_id, const std::string& attr) {
  std::smatch m;
  std::regex re("id=\"" + element_id + "\"[^>]*" + attr + "=\"([^\"]*)\"");
  if (std::regex_search(dom, m, re)) return m[1];
  std::regex re2(attr + "=\"([^\"]*)\"[^>]*id=\"" + element_id + "\"");
  return std::regex_search(dom, m, re2) ? std::string(m[1]) : "";
}

std::string ElementText(const std::string& dom, const std::string& element_id) {
  std::smatch m;
  std::regex re("id=\"" + element_id + "\"[^>]*>([^<]*)<");
  return std::regex_search(dom, m, re) ? std::string(m[1]) : "";
}

// Every check of the page against summary.json.
void CompareWithSummary(const Page& page, const Json& summary, const std::string& which) {
  // A copy: a key missing from the summary reads as null here (the const
  // operator[] of the JSON library is undefined behaviour on a missing key).
  Json s = summary;
  SCOPED_TRACE(which);
  ASSERT_EQ(page.exit, 0) << page.dom.substr(0, 2000);
  EXPECT_TRUE(page.console.empty()) << "console: " << page.console[0];
  EXPECT_TRUE(page.outside_urls.empty()) << "outside request: " << page.outside_urls[0];
  const std::string& dom = page.dom;
  EXPECT_EQ(Attr(dom, "self-check", "data-verdict"), "ok") << ElementText(dom, "self-check");

  // The gate: verdict and every check with its value, threshold and verdict.
  EXPECT_EQ(Attr(dom, "gate", "data-verdict"), s["gate"]["verdict"].get<std::string>());
  bool found = false;
  auto gate = TableRows(dom, "gate-checks", &found);
  ASSERT_TRUE(found) << "no gate checks table";
  ASSERT_EQ(gate.size(), s["gate"]["checks"].size());
  for (size_t i = 0; i < gate.size(); ++i) {
    const Json& c = s["gate"]["checks"][i];
    EXPECT_EQ(gate[i].attrs["data-check"], c["check"].get<std::string>());
    EXPECT_EQ(gate[i].attrs["data-scope"], c.value("scope", ""));
    EXPECT_EQ(gate[i].attrs["data-verdict"], c["verdict"].get<std::string>());
    EXPECT_EQ(gate[i].cells.back(), c["verdict"].get<std::string>()) << "the verdict cell shows another verdict";
    if (c["value"].is_null()) {
      EXPECT_EQ(gate[i].attrs["data-value"], "");
      EXPECT_NE(gate[i].cells[2].find(c["reason"].get<std::string>()), std::string::npos) << "the reason is not shown";
    } else {
      EXPECT_NEAR(std::stod(gate[i].attrs["data-value"]), c["value"].get<double>(), 1e-12) << c["check"];
    }
    EXPECT_EQ(gate[i].attrs["data-threshold"], c["threshold"].dump());
  }

  // Ledger and rejects by stage and reason, each with a count that matches and an example.
  EXPECT_EQ(Count(ElementText(dom, "kept")), s["ledger"]["kept"].get<double>());
  EXPECT_EQ(Count(ElementText(dom, "rejected")), s["ledger"]["rejected"].get<double>());
  auto rejects = TableRows(dom, "rejects", &found);
  ASSERT_TRUE(found) << "no rejects table";
  std::map<std::pair<std::string, std::string>, const DomRow*> by_reason;
  for (const auto& r : rejects) by_reason[{r.attrs.at("data-stage"), r.attrs.at("data-reason")}] = &r;
  size_t reasons = 0;
  double total = 0;
  for (const auto& st : s["rejects_by_stage"]) {
    for (auto it = st["by_reason"].begin(); it != st["by_reason"].end(); ++it) {
      ++reasons;
      auto row = by_reason.find({st["stage"].get<std::string>(), it.key()});
      ASSERT_NE(row, by_reason.end()) << st["stage"] << "/" << it.key() << " missing from the page";
      EXPECT_EQ(Count(row->second->cells[2]), it.value().get<double>()) << it.key();
      EXPECT_EQ(Count(row->second->attrs.at("data-count")), it.value().get<double>()) << it.key();
      total += Count(row->second->cells[2]);
      EXPECT_NE(row->second->cells[3].find(" line "), std::string::npos) << it.key() << " has no example";
      if (st["stage"] == "screen") {
        EXPECT_NE(row->second->cells[3].find("masked:"), std::string::npos) << "a screen reject without its masked form";
      }
    }
  }
  EXPECT_EQ(rejects.size(), reasons);
  EXPECT_EQ(total, s["ledger"]["rejected"].get<double>());

  // Flagged annotators and sources: exactly the significant groups, with their adjusted p.
  const Json* bias = s["stages"].contains("bias") ? &s["stages"]["bias"] : nullptr;
  auto flagged = TableRows(dom, "flagged", &found);
  if (!bias) {
    EXPECT_FALSE(found) << "a flagged table without the bias stage";
    EXPECT_NE(dom.find("stage not run: no position or length tests"), std::string::npos);
  } else {
    ASSERT_TRUE(found) << "no flagged table";
    std::set<std::string> want, got;
    std::map<std::string, double> p_adj;
    for (const char* test : {"position", "length"}) {
      for (const char* kind : {"annotator", "source"}) {
        const Json& fam = bias->at(test).at("by_" + std::string(kind));
        std::set<std::string> names;
        for (const auto& g : fam["groups"]) {
          if (!g.value("significant", false)) continue;  // groups too small to test have no verdict
          std::string key = std::string(test) + "/" + kind + "/" + g[kind].get<std::string>() + "/" +
                            (g.contains("candidates") ? g["candidates"].dump() : "");
          want.insert(key);
          p_adj[key] = g["p_adjusted"].get<double>();
          names.insert(g[kind].get<std::string>());
        }
        // The family's own list of flagged names agrees with its groups.
        std::set<std::string> listed;
        for (const auto& n : fam["significant"]) listed.insert(n.get<std::string>());
        EXPECT_EQ(names, listed) << test << " by " << kind;
      }
    }
    for (const auto& r : flagged) {
      std::string key = r.attrs.at("data-test") + "/" + r.attrs.at("data-kind") + "/" + r.attrs.at("data-group") + "/" +
                        r.attrs.at("data-candidates");
      got.insert(key);
      ASSERT_TRUE(p_adj.count(key)) << key << " is flagged on the page only";
      EXPECT_NEAR(std::stod(r.attrs.at("data-p-adjusted")), p_adj[key], p_adj[key] * 1e-9) << key;
      EXPECT_EQ(r.cells[2], r.attrs.at("data-group"));
    }
    EXPECT_EQ(got, want);
  }

  // No planted personal-data value reaches the page (samples/truth.json).
  for (const auto& p : Truth()["personal_data"]["planted"]) {
    EXPECT_EQ(dom.find(p["value"].get<std::string>()), std::string::npos) << "the page shows a " << p["kind"];
  }
}

bool HaveChromium() { return std::filesystem::exists("/usr/bin/chromium"); }

TEST(ReportDom, DemoReportMatchesSummary) {
  if (!HaveChromium()) GTEST_SKIP() << "/usr/bin/chromium is absent (scripts/install-deps.sh installs Debian's chromium)";
  const Json& s = DemoSummary();
  ASSERT_EQ(s["gate"]["verdict"], "fail");  // the samples plant biased volunteers (docs/gate.md)
  Page page = Load(DemoOutput() + "/report.html", "demo");
  CompareWithSummary(page, s, "demo run");
  // The demo's answers: why the gate failed, and the flagged volunteers.
  EXPECT_NE(page.dom.find("data-check=\"min_position_p_adjusted\""), std::string::npos);
  for (const char* v : {"v01", "v02", "v03"}) {
    EXPECT_NE(page.dom.find(std::string("data-kind=\"annotator\" data-group=\"") + v + "\""), std::string::npos) << v;
  }
}

// A run of the demo inputs with fewer stages and a stricter gate: one check
// fails, one is not evaluated (its stage did not run), one passes.
TEST(ReportDom, FailingGateReportMatchesSummary) {
  if (!HaveChromium()) GTEST_SKIP() << "/usr/bin/chromium is absent (scripts/install-deps.sh installs Debian's chromium)";
  const std::string dir = ::testing::TempDir() + "prefsift-gate-run-" + std::to_string(::getpid());
  std::filesystem::remove_all(dir);
  std::filesystem::create_directories(dir);
  const std::string samples = SourceDir() + "/samples/";
  Json plan = Json::parse(ReadFile(samples + "demo-plan.json"), nullptr, true, /*ignore_comments=*/true);
  for (auto& in : plan["inputs"]) in["path"] = samples + in["path"].get<std::string>();
  plan.erase("output");
  for (const char* stage : {"leakage", "screen", "bias"}) plan["stages"][stage] = Json{{"enabled", false}};
  plan["gate"] = Json{{"min_kept_share", 0.99}, {"max_shortcut_accuracy", 0.6}, {"require_split_checks", true}};
  std::ofstream(dir + "/plan.json") << plan.dump(2);
  std::string log;
  int rc = Shell(std::string(PREFSIFT_BINARY) + " run -q --plan " + dir + "/plan.json --out " + dir + "/out", &log);
  ASSERT_NE(rc, 0) << log;
  ASSERT_TRUE(std::filesystem::exists(dir + "/out/summary.json")) << log;
  Json s = Json::parse(ReadFile(dir + "/out/summary.json"));
  ASSERT_EQ(s["gate"]["verdict"], "fail");
  std::set<std::string> verdicts;
  for (const auto& c : s["gate"]["checks"]) verdicts.insert(c["verdict"].get<std::string>());
  EXPECT_EQ(verdicts, (std::set<std::string>{"pass", "fail", "not evaluated"}));
  CompareWithSummary(Load(dir + "/out/report.html", "gate"), s, "failing-gate run");
  std::filesystem::remove_all(dir);
}

// The detectors themselves: a page that logs to the console and a page that
// loads from outside must both be caught.
TEST(ReportDom, DetectorsCatchConsoleMessagesAndOutsideRequests) {
  if (!HaveChromium()) GTEST_SKIP() << "/usr/bin/chromium is absent (scripts/install-deps.sh installs Debian's chromium)";
  const std::string dir = ::testing::TempDir() + "prefsift-dom-controls-" + std::to_string(::getpid());
  std::filesystem::create_directories(dir);
  std::ofstream(dir + "/console.html") << "<html><body><script>console.error('x')</script></body></html>";
  // example.invalid: a name reserved never to resolve (RFC 2606).
  std::ofstream(dir + "/outside.html") << "<html><body><img src=\"http://example.invalid/a.png\"></body></html>";
  EXPECT_FALSE(Load(dir + "/console.html", "console").console.empty());
  EXPECT_FALSE(Load(dir + "/outside.html", "outside").outside_urls.empty());
  std::filesystem::remove_all(dir);
}

}  // namespace
}  // namespace prefsift::e2e
