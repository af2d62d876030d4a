// The end of a run; see finish.h.
#include "pipeline/finish.h"

#include <nlohmann/json.hpp>
#include <simdjson.h>

#include <algorithm>
#include <cmath>
#include <map>
#include <set>
#include <cstdlib>
#include <ctime>
#include <filesystem>
#include <vector>

#include "core/file_digest.h"
#include "core/sha256.h"
#include "core/thread_pool.h"
#include "report/datasheet.h"
#include "report/gate.h"
#include "report/html_report.h"
#include "report/tool_info.h"
#include "report/json_find.h"

namespace prefsift {

using Json = nlohmann::ordered_json;

namespace {

constexpr const char* kDocuments[] = {"summary.json", "datasheet.md", "datasheet.json", "report.html"};

using Digest = FileDigest;

Result<Digest> HashFile(FileSystem* fs, const std::string& path) { return DigestFile(fs, path); }

// HashFile of every path, up to one thread per core at a time; results in
// the order of `paths`.
std::vector<Result<Digest>> HashFiles(FileSystem* fs, const std::vector<std::string>& paths) {
  std::vector<Result<Digest>> out(paths.size(), Status::Internal("not hashed"));
  ThreadPool pool(0);
  pool.ParallelFor(paths.size(), [&](size_t i, unsigned) {
    if (!paths[i].empty()) out[i] = HashFile(fs, paths[i]);  // "": hashed already
  });
  return out;
}

// Plain file names in the staging folder, sorted, without the documents.
std::vector<std::string> OutputFiles(FileSystem* fs, const OutputDir& out) {
  std::vector<std::string> names;
  auto listed = fs->List(out.StagingPath(""));
  if (!listed.ok()) return names;
  for (const std::string& name : listed.value()) {
    if (fs->IsDirectory(out.StagingPath(name))) continue;
    if (std::find(std::begin(kDocuments), std::end(kDocuments), name) != std::end(kDocuments)) continue;
    names.push_back(name);
  }
  std::sort(names.begin(), names.end());
  return names;
}

// Calls fn(line) for every line of a file; false when it cannot be read.
template <typename Fn>
bool ForEachLine(FileSystem* fs, const std::string& path, Fn fn) {
  auto f = fs->OpenRead(path);
  if (!f.ok()) return false;
  std::string carry, buf(1 << 16, '\0');
  for (;;) {
    auto n = f.value()->Read(buf.data(), buf.size());
    if (!n.ok()) return false;
    if (n.value() == 0) break;
    carry.append(buf.data(), n.value());
    size_t pos = 0;
    for (size_t nl; (nl = carry.find('\n', pos)) != std::string::npos; pos = nl + 1) {
      fn(std::string_view(carry).substr(pos, nl - pos));
    }
    carry.erase(0, pos);
  }
  if (!carry.empty()) fn(std::string_view(carry));
  return true;
}

std::string Text(const Json& j, const char* key) {
  return j.is_object() && j.contains(key) && j[key].is_string() ? j[key].get<std::string>() : "";
}

// The masked form of a finding: its kind, place and preview; never the value.
Json MaskedFinding(const Json& f) {
  std::string kind = Text(f, "kind").empty() ? Text(f, "rule") : Text(f, "kind");
  std::string preview = Text(f, "preview").empty() ? Text(f, "masked") : Text(f, "preview");
  Json m{{"kind", kind}, {"pointer", Text(f, "pointer")}, {"preview", preview}};
  if (f.contains("applied")) m["applied"] = f["applied"];
  return m;
}

// Most lines of a large findings file add nothing to the examples: their
// kind has an example already and their record is no reject example. A quick
// look at three fields (simdjson, no tree) finds those lines, so that only the
// rest are parsed whole; any line it cannot read plainly (a field missing or
// of another type) is left to the whole parse, so the examples do not change.
class FindingSkipper {
 public:
  bool Unneeded(std::string_view line, const std::map<std::pair<std::string, uint64_t>, size_t>& example_of,
                const std::set<std::string, std::less<>>& kinds_seen) {
    padded_.assign(line);
    padded_.resize(line.size() + simdjson::SIMDJSON_PADDING);
    simdjson::ondemand::document doc;
    if (parser_.iterate(padded_.data(), line.size(), padded_.size()).get(doc) != simdjson::SUCCESS) return false;
    simdjson::ondemand::object obj;
    if (doc.get_object().get(obj) != simdjson::SUCCESS) return false;
    std::string_view kind, input;
    if (obj.find_field_unordered("kind").get_string().get(kind) != simdjson::SUCCESS || kind.empty()) return false;
    if (!kinds_seen.count(kind)) return false;
    if (obj.find_field_unordered("input").get_string().get(input) != simdjson::SUCCESS) return false;
    uint64_t no = 0;
    if (obj.find_field_unordered("line").get_uint64().get(no) != simdjson::SUCCESS) return false;
    return !example_of.count({std::string(input), no});
  }

 private:
  simdjson::ondemand::parser parser_;
  std::string padded_;
};

// The reject examples (passes.h RejectExamples) with their records' masked
// findings, and one example per personal-data kind from the findings file. Examples never
// carry record text: the place, the reason's sentence, and for records with
// personal-data findings the findings' masked forms.
struct Examples {
  Json rejects = Json::array();
  Json personal_data = Json::array();
};

Examples CollectExamples(FileSystem* fs, const OutputDir& out, const Json& summary, Json reject_examples) {
  Examples ex;
  ex.rejects = std::move(reject_examples);
  std::map<std::pair<std::string, uint64_t>, size_t> example_of;  // (input, line) -> index in ex.rejects
  for (size_t k = 0; k < ex.rejects.size(); ++k) {
    const Json& e = ex.rejects[k];
    if (e["line"].is_number_unsigned()) example_of[{Text(e, "input"), e["line"].get<uint64_t>()}] = k;
  }
  const Json* sec = FindPath(summary, {"stages", "screen"});
  if (!sec) return ex;
  std::string name = Text(*sec, "findings_file").empty() ? "personal_data_findings.jsonl" : Text(*sec, "findings_file");
  std::set<std::string, std::less<>> kinds_seen;
  FindingSkipper skip;
  ForEachLine(fs, out.StagingPath(name), [&](std::string_view line) {
    if (skip.Unneeded(line, example_of, kinds_seen)) return;
    Json j = Json::parse(line, nullptr, false);
    if (!j.is_object()) return;
    Json masked = MaskedFinding(j);
    if (j.contains("line") && j["line"].is_number_unsigned()) {
      auto it = example_of.find({Text(j, "input"), j["line"].get<uint64_t>()});
      if (it != example_of.end()) {
        Json& e = ex.rejects[it->second];
        if (!e.contains("masked")) e["masked"] = Json::array();
        e["masked"].push_back(masked);
      }
    }
    if (kinds_seen.insert(masked["kind"].get<std::string>()).second) {
      Json k = masked;
      k["input"] = Text(j, "input");
      k["line"] = j.contains("line") ? j["line"] : Json(nullptr);
      k["id"] = j.contains("id") ? j["id"] : Json(nullptr);
      ex.personal_data.push_back(std::move(k));
    }
  });
  return ex;
}

}  // namespace

Status ValidateFinishPlan(const Plan& plan) {
  Status s = ValidateGate(plan.gate);
  if (!s.ok()) return s;
  return ValidateProvenance(plan.provenance);
}

Status FinishSummary(const Plan& plan, FileSystem* fs, const OutputDir& out, Json* summary, const Json& gate,
                     Json reject_examples, const RunClock& clock,
                     const std::vector<std::optional<FileDigest>>& input_digests, const DigestingFileSystem* written) {
  Examples ex = CollectExamples(fs, out, *summary, std::move(reject_examples));
  (*summary)["gate"] = gate;
  (*summary)["examples"] = Json{
      {"note", "one rejected record per stage and reason (the first in rejects.jsonl) and one finding per "
               "personal-data kind: place, reason and masked forms only, never record text"},
      {"rejects", std::move(ex.rejects)},
      {"personal_data", std::move(ex.personal_data)}};

  Json p;
  p["tool"] = ToolInfo();
  p["plan_sha256"] = plan.plan_digest.empty() ? Json("no plan file (command line only)") : Json(plan.plan_digest);
  p["seed"] = plan.seed;
  p["time"] = ProvenanceTime(clock);
  // Inputs were hashed while pass 1 read them and outputs while they were
  // written (DigestingFileSystem); a file without a digest there is hashed
  // here, each on its own thread (SHA-256 is the cost: gigabytes at about
  // 1.5 GB/s a core), then listed in plan / file order.
  std::vector<std::string> paths;
  for (size_t i = 0; i < plan.inputs.size(); ++i) {
    paths.push_back(i < input_digests.size() && input_digests[i] ? std::string() : plan.inputs[i].path);
  }
  const std::vector<std::string> names = OutputFiles(fs, out);
  std::vector<std::optional<FileDigest>> known(names.size());
  for (size_t k = 0; k < names.size(); ++k) {
    if (written) known[k] = written->DigestOf(out.StagingPath(names[k]));
    paths.push_back(known[k] ? std::string() : out.StagingPath(names[k]));
  }
  std::vector<Result<Digest>> digests = HashFiles(fs, paths);
  for (size_t k = 0; k < names.size(); ++k) {
    if (known[k]) digests[plan.inputs.size() + k] = *known[k];
  }
  Json inputs = Json::array();
  for (size_t i = 0; i < plan.inputs.size(); ++i) {
    const Result<Digest> d = paths[i].empty() ? Result<Digest>(*input_digests[i]) : digests[i];
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
