// The end of a run; see finish.h.
#include "report/finish.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cstdlib>
#include <ctime>
#include <filesystem>
#include <vector>

#include "core/sha256.h"
#include "core/thread_pool.h"
#include "prefsift_version.h"
#include "report/datasheet.h"
#include "report/gate.h"
#include "report/html_report.h"

namespace prefsift {

using Json = nlohmann::ordered_json;

namespace {

constexpr const char* kDocuments[] = {"summary.json", "datasheet.md", "datasheet.json", "report.html"};

struct Digest {
  std::string sha256;
  uint64_t bytes = 0;
};

Result<Digest> HashFile(FileSystem* fs, const std::string& path) {
  auto f = fs->OpenRead(path);
  if (!f.ok()) return f.status();
  Sha256 h;
  Digest d;
  std::string buf(1 << 20, '\0');
  for (;;) {
    auto n = f.value()->Read(buf.data(), buf.size());
    if (!n.ok()) return n.status();
    if (n.value() == 0) break;
    h.Update(std::string_view(buf.data(), n.value()));
    d.bytes += n.value();
  }
  d.sha256 = h.HexDigest();
  return d;
}

// HashFile of every path, up to one thread per core at a time; results in
// the order of `paths`.
std::vector<Result<Digest>> HashFiles(FileSystem* fs, const std::vector<std::string>& paths) {
  std::vector<Result<Digest>> out(paths.size(), Status::Internal("not hashed"));
  ThreadPool pool(0);
  pool.ParallelFor(paths.size(), [&](size_t i, unsigned) { out[i] = HashFile(fs, paths[i]); });
  return out;
}

// Plain file names in the staging folder, sorted, without the documents.
std::vector<std::string> OutputFiles(const OutputDir& out) {
  std::vector<std::string> names;
  std::error_code ec;
  for (std::filesystem::directory_iterator it(out.StagingPath(""), ec), end; !ec && it != end; it.increment(ec)) {
    if (!it->is_regular_file(ec)) continue;
    std::string name = it->path().filename().string();
    if (std::find(std::begin(kDocuments), std::end(kDocuments), name) != std::end(kDocuments)) continue;
    names.push_back(name);
  }
  std::sort(names.begin(), names.end());
  return names;
}

Json RunTime() {
  const char* sde = std::getenv("SOURCE_DATE_EPOCH");
  std::time_t t = 0;
  std::string source;
  if (sde && *sde) {
    char* end = nullptr;
    long long v = std::strtoll(sde, &end, 10);
    if (end && *end == '\0' && v >= 0) {
      t = static_cast<std::time_t>(v);
      source = "SOURCE_DATE_EPOCH";
    }
  }
  if (source.empty()) {
    // No clock time by default: the same inputs, plan and seed must give
    // byte-identical outputs. SOURCE_DATE_EPOCH stamps a run time on request.
    return Json{{"utc", "time not recorded"},
                {"source", "set SOURCE_DATE_EPOCH (seconds since 1970, UTC) to record one; without it reruns stay "
                           "byte-identical"}};
  }
  std::tm tm{};
  gmtime_r(&t, &tm);
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%SZ", &tm);
  return Json{{"utc", buf}, {"source", source}};
}

// Personal-data findings left in kept records with no action applied.
long long RemainingFindings(FileSystem* fs, const OutputDir& out, const Json& summary) {
  if (!summary.contains("stages") || !summary["stages"].contains("screen")) return -1;
  const Json& sec = summary["stages"]["screen"];
  std::string name = sec.contains("findings_file") && sec["findings_file"].is_string()
                         ? sec["findings_file"].get<std::string>() : "personal_data_findings.jsonl";
  auto f = fs->OpenRead(out.StagingPath(name));
  if (!f.ok()) return -1;
  std::string all, buf(1 << 16, '\0');
  for (;;) {
    auto n = f.value()->Read(buf.data(), buf.size());
    if (!n.ok()) return -1;
    if (n.value() == 0) break;
    all.append(buf.data(), n.value());
  }
  long long left = 0;
  size_t pos = 0;
  while (pos < all.size()) {
    size_t nl = all.find('\n', pos);
    if (nl == std::string::npos) nl = all.size();
    Json j = Json::parse(std::string_view(all).substr(pos, nl - pos), nullptr, false);
    pos = nl + 1;
    if (!j.is_object()) continue;
    bool kept = j.contains("kept") && j["kept"].is_boolean() && j["kept"].get<bool>();
    bool none = j.contains("applied") && j["applied"] == "none";
    if (kept && none) ++left;
  }
  return left;
}

}  // namespace

Json ProvenanceTime() { return RunTime(); }

Json ToolInfo() { return Json{{"name", "prefsift"}, {"version", PREFSIFT_VERSION}, {"revision", PREFSIFT_REVISION}}; }

Status ValidateFinishPlan(const Plan& plan) {
  Status s = ValidateGate(plan.gate);
  if (!s.ok()) return s;
  return ValidateProvenance(plan.provenance);
}

Status FinishSummary(const Plan& plan, FileSystem* fs, const OutputDir& out, Json* summary, bool* gate_failed,
                     const std::vector<std::string>& command_stages) {
  GateExtras extras;
  extras.remaining_personal_data = RemainingFindings(fs, out, *summary);
  bool failed = false;
  const bool defaulted = !plan.gate_given && plan.gate.empty();  // a plan built in code may set plan.gate
  (*summary)["gate"] = EvaluateGate(defaulted ? DefaultGate() : plan.gate, *summary, extras, &failed, defaulted,
                                   &command_stages);
  *gate_failed = failed;

  Json p;
  p["tool"] = ToolInfo();
  p["plan_sha256"] = plan.plan_digest.empty() ? Json("no plan file (command line only)") : Json(plan.plan_digest);
  p["seed"] = plan.seed;
  p["time"] = RunTime();
  // Every input and output is hashed on its own thread (SHA-256 is the cost:
  // gigabytes at about 1.5 GB/s a core), then listed in plan / file order.
  std::vector<std::string> paths;
  for (const auto& in : plan.inputs) paths.push_back(in.path);
  const std::vector<std::string> names = OutputFiles(out);
  for (const auto& name : names) paths.push_back(out.StagingPath(name));
  std::vector<Result<Digest>> digests = HashFiles(fs, paths);
  Json inputs = Json::array();
  for (size_t i = 0; i < plan.inputs.size(); ++i) {
    const auto& d = digests[i];
    if (!d.ok()) return d.status();
    const auto& in = plan.inputs[i];
    inputs.push_back(Json{{"name", in.name}, {"path", in.path}, {"bytes", d.value().bytes}, {"sha256", d.value().sha256}});
  }
  p["inputs"] = std::move(inputs);
  Json outputs = Json::array();
  for (size_t k = 0; k < names.size(); ++k) {
    const auto& d = digests[plan.inputs.size() + k];
    if (!d.ok()) return d.status();
    outputs.push_back(Json{{"file", names[k]}, {"bytes", d.value().bytes}, {"sha256", d.value().sha256}});
  }
  p["outputs"] = std::move(outputs);
  p["outputs_note"] =
      "summary.json is hashed in the datasheet; the datasheet and report.html cannot list their own digests";
  const Json* packs = nullptr;
  if (summary->contains("stages") && (*summary)["stages"].contains("screen") &&
      (*summary)["stages"]["screen"].contains("packs")) {
    packs = &(*summary)["stages"]["screen"]["packs"];
  }
  p["rule_packs"] = packs ? *packs : Json("the screen stage did not run");
  (*summary)["provenance"] = std::move(p);
  return Status::Ok();
}

Status WriteDocuments(const Plan& plan, FileSystem* fs, OutputDir& out, const Json& summary) {
  auto d = HashFile(fs, out.StagingPath("summary.json"));
  if (!d.ok()) return d.status();
  Json sheet = BuildDatasheet(plan.provenance, plan.stages, summary, d.value().sha256);
  Status s = out.Write("datasheet.json", sheet.dump(2) + "\n");
  if (s.ok()) s = out.Write("datasheet.md", DatasheetMarkdown(sheet));
  if (s.ok()) s = out.Write("report.html", RenderHtmlReport(summary, sheet));
  return s;
}

}  // namespace prefsift
