#include "audit/split_audit.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <map>
#include <thread>

#include "core/blank.h"
#include "core/record.h"
#include "io/file_system.h"
#include "io/line_reader.h"
#include "io/output_dir.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;
constexpr size_t kChunk = 4096;

struct Twin {
  std::string train_id;
  uint64_t train_line = 0;
  LeakFinding finding;
};

struct ItemTwins {
  uint64_t count = 0;
  bool detector[kLeakDetectors] = {false, false, false, false};
  std::vector<Twin> listed;
};

std::string Stem(const std::string& path) {
  std::string name = std::filesystem::path(path).filename().string();
  for (const char* ext : {".gz", ".zst", ".jsonl", ".json", ".ndjson", ".txt"}) {
    std::string e(ext);
    if (name.size() > e.size() && name.compare(name.size() - e.size(), e.size(), e) == 0) name.resize(name.size() - e.size());
  }
  return name;
}

std::string Canonical(const std::string& p) {
  std::error_code ec;
  auto c = std::filesystem::weakly_canonical(p, ec);
  return ec ? p : c.string();
}

}  // namespace

Result<AuditOptions> AuditOptionsFromPlan(const Plan& plan, const std::string& train,
                                          const std::vector<std::string>& heldout, bool layouts_from_last_inputs) {
  AuditOptions o;
  o.train_path = train;
  o.heldout_paths = heldout;
  std::string base = plan.plan_path.empty() ? "" : std::filesystem::path(plan.plan_path).parent_path().string();
  auto det = ParseLeakSettings(StageSettings(plan, "leakage"), base, "stages.leakage", false);
  if (!det.ok()) return det.status();
  o.detectors = std::move(det).value();
  o.normalize = plan.normalize;
  o.limits = plan.limits;
  o.threads = plan.threads ? plan.threads : std::max(1u, std::thread::hardware_concurrency());
  o.out = plan.output;
  o.overwrite = plan.overwrite;
  std::vector<std::string> files{train};
  files.insert(files.end(), heldout.begin(), heldout.end());
  std::vector<Layout> layouts;
  if (layouts_from_last_inputs) {
    if (plan.inputs.size() < files.size()) return Status::Internal("audit: layouts for the named files are missing");
    for (size_t i = plan.inputs.size() - files.size(); i < plan.inputs.size(); ++i) layouts.push_back(plan.inputs[i].layout);
  } else {
    if (plan.inputs.empty()) {
      return Status::Usage("audit: the files need a layout: --layout PRESET and/or --field KEY=POINTER, "
                           "or a plan (--plan) whose inputs give one");
    }
    for (const auto& f : files) {
      const Layout* l = &plan.inputs[0].layout;
      for (const auto& in : plan.inputs) {
        if (Canonical(in.path) == Canonical(f)) l = &in.layout;
      }
      layouts.push_back(*l);
    }
  }
  o.train_layout = layouts[0];
  o.heldout_layouts.assign(layouts.begin() + 1, layouts.end());
  return o;
}

namespace {

// The training file, in chunks parsed and checked in parallel, merged in file
// order: each held-out item's twins, and the training records per (group kind,
// value).
Status ScanTraining(const AuditOptions& o, FileSystem* fs, const LeakIndex& idx, std::vector<ItemTwins>* twins,
                    std::map<std::pair<std::string, std::string>, uint64_t>* train_groups, AuditOutcome* out) {
  auto opened = LineReader::Open(fs, o.train_path, o.limits.max_line_bytes);
  if (!opened.ok()) return Status::Input("audit: cannot read " + o.train_path + ": " + opened.status().message());
  auto& reader = opened.value();
  const unsigned threads = std::max(1u, o.threads);
  std::vector<std::unique_ptr<RecordReader>> parsers;
  for (unsigned t = 0; t < threads; ++t) parsers.push_back(std::make_unique<RecordReader>(o.train_layout, o.limits));
  struct Slot {
    uint64_t line = 0;
    std::string text;
    bool ok = false;
    Record rec;
    std::vector<LeakFinding> findings;
  };
  bool eof = false;
  while (!eof) {
    std::vector<Slot> chunk;
    while (chunk.size() < kChunk) {
      std::string_view line;
      uint64_t no = 0;
      auto next = reader->Read(&line, &no);
      if (!next.ok()) return next.status();
      if (next.value() == LineReader::Next::kEnd) {
        eof = true;
        break;
      }
      if (next.value() == LineReader::Next::kLine && IsBlank(line)) continue;
      Slot s;
      s.line = no;
      if (next.value() == LineReader::Next::kLine) s.text = std::string(line);
      chunk.push_back(std::move(s));
    }
    auto work = [&](unsigned t) {
      for (size_t i = t; i < chunk.size(); i += threads) {
        Slot& s = chunk[i];
        if (s.text.empty()) continue;
        RejectReason why;
        s.ok = parsers[t]->Read(s.text, Stem(o.train_path) + ":" + std::to_string(s.line), &s.rec, &why);
        if (s.ok) idx.CheckPrompt(s.rec.UserPromptText(), true, &s.findings);
      }
    };
    if (threads == 1 || chunk.size() < 64) {
      work(0);
    } else {
      std::vector<std::thread> pool;
      for (unsigned t = 0; t < threads; ++t) pool.emplace_back(work, t);
      for (auto& th : pool) th.join();
    }
    for (Slot& s : chunk) {
      if (!s.ok) {
        ++out->train_unreadable;
        continue;
      }
      ++out->train_records;
      if (s.rec.thread) ++(*train_groups)[{"thread", *s.rec.thread}];
      if (s.rec.group) ++(*train_groups)[{"group", *s.rec.group}];
      if (o.by_annotator && s.rec.annotator) ++(*train_groups)[{"annotator", *s.rec.annotator}];
      // One twin entry per (held-out item, training record): the first detector in order.
      std::vector<uint32_t> seen;
      for (auto& f : s.findings) {
        ItemTwins& it = (*twins)[f.item];
        it.detector[static_cast<int>(f.detector)] = true;
        if (std::find(seen.begin(), seen.end(), f.item) != seen.end()) continue;
        seen.push_back(f.item);
        ++it.count;
        if (it.listed.size() < o.max_twins) it.listed.push_back({s.rec.id, s.line, f});
      }
    }
  }

  return Status::Ok();
}

// The held-out records per (group kind, value).
std::map<std::pair<std::string, std::string>, uint64_t> HeldoutGroups(const AuditOptions& o, const EvalCorpus& ev) {
  std::map<std::pair<std::string, std::string>, uint64_t> held_groups;
  for (const auto& item : ev.items) {
    if (!item.thread.empty()) ++held_groups[{"thread", item.thread}];
    if (!item.group.empty()) ++held_groups[{"group", item.group}];
    if (o.by_annotator && !item.annotator.empty()) ++held_groups[{"annotator", item.annotator}];
  }

  return held_groups;
}

// audit.jsonl: one line per held-out item with a training twin, then one per
// group on both sides. Counts into *out, *per_file and *shared_by_kind.
Status WriteAuditLines(const AuditOptions& o, const EvalCorpus& ev, const std::vector<ItemTwins>& twins,
                       const std::map<std::pair<std::string, std::string>, uint64_t>& held_groups,
                       const std::map<std::pair<std::string, std::string>, uint64_t>& train_groups,
                       WritableFile* lines, AuditOutcome* out, std::vector<uint64_t>* per_file,
                       std::map<std::string, uint64_t>* shared_by_kind) {
  for (size_t i = 0; i < ev.items.size(); ++i) {
    const ItemTwins& it = twins[i];
    if (it.count == 0) continue;
    ++out->heldout_with_twin;
    ++(*per_file)[ev.items[i].set];
    Json kinds = Json::array();
    for (int d = 0; d < kLeakDetectors; ++d) {
      if (!it.detector[d]) continue;
      ++out->by_detector[d];
      kinds.push_back(LeakDetectorName(static_cast<LeakDetector>(d)));
    }
    Json listed = Json::array();
    for (const Twin& t : it.listed) {
      Json j{{"train_id", t.train_id}, {"train_line", t.train_line},
             {"detector", LeakDetectorName(t.finding.detector)}, {"measure", t.finding.measure}};
      if (t.finding.detector == LeakDetector::kNear) j["score"] = std::round(t.finding.score * 1000.0) / 1000.0;
      if (t.finding.shared) j["shared_grams"] = t.finding.shared;
      j["span"] = t.finding.span;
      listed.push_back(std::move(j));
    }
    Json j{{"kind", "twin"}, {"heldout_file", ev.sets[ev.items[i].set].spec.path},
           {"heldout_id", ev.items[i].id}, {"heldout_line", ev.items[i].line}, {"detectors", kinds},
           {"train_twins", it.count}, {"listed", std::move(listed)}};
    Status s = lines->Append(j.dump() + "\n");
    if (!s.ok()) return s;
  }
  for (const auto& [key, n] : held_groups) {
    auto t = train_groups.find(key);
    if (t == train_groups.end()) continue;
    ++out->shared_groups;
    ++(*shared_by_kind)[key.first];
    Json j{{"kind", "shared_group"}, {"group_kind", key.first}, {"value", key.second}, {"train_records", t->second},
           {"heldout_records", n}};
    Status s = lines->Append(j.dump() + "\n");
    if (!s.ok()) return s;
  }
  return Status::Ok();
}

// audit.json.
Json AuditSummary(const AuditOptions& o, const EvalCorpus& ev, const LeakSettings& settings, const LeakIndex& idx,
                  const AuditOutcome& out, const std::vector<uint64_t>& per_file,
                  const std::map<std::string, uint64_t>& shared_by_kind) {
  Json summary;
  summary["train"] = Json{{"path", o.train_path}, {"records", out.train_records}, {"unreadable_lines", out.train_unreadable}};
  Json held = Json::array();
  for (size_t i = 0; i < ev.sets.size(); ++i) {
    held.push_back(Json{{"path", ev.sets[i].spec.path}, {"records", ev.sets[i].items}, {"with_train_twin", per_file[i]}});
  }
  summary["heldout"] = std::move(held);
  Json det;
  LeakSettingsToJson(settings, idx.ngram_n(), &det);
  det.erase("answers");
  for (auto it = det.begin(); it != det.end(); ++it) {
    if (it.value().is_object()) it.value().erase("policy");
  }
  summary["detectors"] = std::move(det);
  Json twins_by = Json::object();
  for (int d = 0; d < 3; ++d) twins_by[LeakDetectorName(static_cast<LeakDetector>(d))] = out.by_detector[d];
  summary["heldout_with_train_twin"] = out.heldout_with_twin;
  summary["heldout_with_train_twin_by_detector"] = std::move(twins_by);
  summary["groups_checked"] = o.by_annotator ? Json::array({"thread", "group", "annotator"}) : Json::array({"thread", "group"});
  summary["shared_groups"] = out.shared_groups;
  Json sk = Json::object();
  for (const auto& [k, n] : shared_by_kind) sk[k] = n;
  summary["shared_groups_by_kind"] = std::move(sk);
  summary["leak_found"] = out.leak_found;
  return summary;
}

// The table printed on the terminal.
std::string AuditTable(const EvalCorpus& ev, const AuditOutcome& out, const std::vector<uint64_t>& per_file,
                       const std::map<std::string, uint64_t>& shared_by_kind) {
  char buf[256];
  std::string t;
  std::snprintf(buf, sizeof buf, "%-34s %10s %12s\n", "held-out file", "records", "with twin");
  t += buf;
  for (size_t i = 0; i < ev.sets.size(); ++i) {
    std::snprintf(buf, sizeof buf, "%-34s %10llu %12llu\n", ev.sets[i].spec.name.substr(0, 34).c_str(),
                  static_cast<unsigned long long>(ev.sets[i].items), static_cast<unsigned long long>(per_file[i]));
    t += buf;
  }
  std::snprintf(buf, sizeof buf, "twins by detector: exact %llu, ngram %llu, near %llu (training records read: %llu)\n",
                static_cast<unsigned long long>(out.by_detector[0]), static_cast<unsigned long long>(out.by_detector[1]),
                static_cast<unsigned long long>(out.by_detector[2]), static_cast<unsigned long long>(out.train_records));
  t += buf;
  std::string groups;
  for (const auto& [k, n] : shared_by_kind) groups += (groups.empty() ? "" : ", ") + k + " " + std::to_string(n);
  t += "groups on both sides: " + (groups.empty() ? std::string("none") : groups) + "\n";
  t += out.leak_found ? "LEAKAGE FOUND: see audit.jsonl\n" : "no leakage found\n";
  return t;
}

}  // namespace

Result<AuditOutcome> RunSplitAudit(const AuditOptions& o, FileSystem* fs) {
  if (o.train_path.empty()) return Status::Usage("audit: name the training file (--train FILE)");
  if (o.heldout_paths.empty()) return Status::Usage("audit: name at least one held-out file (--heldout FILE)");
  if (o.heldout_layouts.size() != o.heldout_paths.size()) return Status::Internal("audit: one layout per held-out file");
  if (o.out.empty()) return Status::Usage("audit: no output folder: pass --out DIR");
  // 1. Held-out files as evaluation sets.
  std::vector<EvalSetSpec> specs;
  std::map<std::string, int> used;
  for (size_t i = 0; i < o.heldout_paths.size(); ++i) {
    EvalSetSpec spec;
    spec.path = o.heldout_paths[i];
    spec.name = Stem(spec.path);
    if (used[spec.name]++) spec.name += "#" + std::to_string(i + 1);
    spec.format = EvalFormat::kPreference;
    spec.layout = o.heldout_layouts[i];
    specs.push_back(std::move(spec));
  }
  auto corpus = LoadEvalSets(specs, fs, o.limits);
  if (!corpus.ok()) return corpus.status();
  LeakSettings settings = o.detectors;
  settings.enabled[static_cast<int>(LeakDetector::kAnswer)] = false;
  auto index = LeakIndex::Build(corpus.value(), settings, o.normalize, o.threads);
  if (!index.ok()) return index.status();
  const EvalCorpus& ev = corpus.value();
  const LeakIndex& idx = *index.value();

  // 2. The training file.
  AuditOutcome out;
  std::vector<ItemTwins> twins(ev.items.size());
  std::map<std::pair<std::string, std::string>, uint64_t> train_groups;  // (kind, value) -> records
  if (Status s = ScanTraining(o, fs, idx, &twins, &train_groups, &out); !s.ok()) return s;

  // 3. Groups present on both sides.
  const auto held_groups = HeldoutGroups(o, ev);

  // 4. Outputs.
  std::vector<ReadPath> reads{{o.train_path, "training file"}};
  for (const auto& h : o.heldout_paths) reads.push_back({h, "held-out file"});
  if (Status clear = CheckOutputClear(o.out, reads); !clear.ok()) return clear;
  auto dir = OutputDir::Begin(fs, o.out, o.overwrite);
  if (!dir.ok()) return dir.status();
  auto lines = dir.value()->Create("audit.jsonl");
  if (!lines.ok()) return lines.status();
  out.heldout_records = ev.items.size();
  std::vector<uint64_t> per_file(ev.sets.size(), 0);
  std::map<std::string, uint64_t> shared_by_kind;
  Status s = WriteAuditLines(o, ev, twins, held_groups, train_groups, lines.value().get(), &out, &per_file,
                             &shared_by_kind);
  if (!s.ok()) return s;
  s = lines.value()->Close();
  if (!s.ok()) return s;
  out.leak_found = out.heldout_with_twin > 0 || out.shared_groups > 0;
  const Json summary = AuditSummary(o, ev, settings, idx, out, per_file, shared_by_kind);
  s = dir.value()->Write("audit.json", summary.dump(2) + "\n");
  if (!s.ok()) return s;
  s = dir.value()->Commit();
  if (!s.ok()) return s;

  // 5. The terminal table.
  out.table = AuditTable(ev, out, per_file, shared_by_kind);
  return out;
}

}  // namespace prefsift
