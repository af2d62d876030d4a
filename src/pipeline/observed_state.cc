#include "pipeline/observed_state.h"

#include <nlohmann/json.hpp>

#include <chrono>
#include <cstdio>
#include <functional>

#include <sys/resource.h>

#include "core/sha256.h"
#include "core/state_file.h"
#include "io/output_dir.h"
#include "pipeline/passes.h"
#include "stages/stage.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;
constexpr const char* kKind = "observed";

std::string StageSection(const std::string& name) { return "stage " + name; }

void WriteStats(StateWriter& w, const InputStats& s, const InputIngest& g) {
  w.U64(s.lines);
  w.U64(s.blank_lines);
  w.U64(s.entries);
  w.U64(s.records);
  w.Str(s.compression);
  w.U8(g.at_file_end);
  w.U64(g.evidence.judgments);
  w.U64(g.evidence.first_slot);
  w.U64(g.evidence.past_last);
  w.U64(g.evidence.best_rank_0);
  w.U64(g.evidence.best_rank_1);
  w.U64(g.tallies.size());
  for (const auto& [reason, t] : g.tallies) {
    w.Str(reason);
    w.U64(t.count);
    w.Str(t.field);
    w.U64(t.first_line);
    w.Str(t.first_keys);
  }
}

void ReadStats(StateReader& r, InputStats* s, InputIngest* g) {
  s->lines = r.U64();
  s->blank_lines = r.U64();
  s->entries = r.U64();
  s->records = r.U64();
  s->compression = r.Str();
  g->at_file_end = r.U8() != 0;
  g->evidence.judgments = r.U64();
  g->evidence.first_slot = r.U64();
  g->evidence.past_last = r.U64();
  g->evidence.best_rank_0 = r.U64();
  g->evidence.best_rank_1 = r.U64();
  const uint64_t n = r.Count(40);
  for (uint64_t i = 0; i < n && r.ok(); ++i) {
    std::string reason = r.Str();
    IngestTally& t = g->tallies[reason];
    t.count = r.U64();
    t.field = r.Str();
    t.first_line = r.U64();
    t.first_keys = r.Str();
  }
}

// Each candidate fact as its own array (hashes, ranks, code points, words),
// the state file's layout since before CandidateFacts.
template <typename T, typename Get>
void WriteColumn(StateWriter& w, const RecordFacts& f, Get get) {
  std::vector<T> column;
  column.reserve(f.cands.size());
  for (const CandidateFacts& c : f.cands) column.push_back(get(c));
  w.Vec(column);
}

template <typename T, typename Set>
void ReadColumn(StateReader& r, std::vector<CandidateFacts>* cands, bool first, Set set) {
  std::vector<T> column;
  r.Vec(&column);
  if (first) cands->resize(column.size());
  if (column.size() != cands->size()) {
    if (r.ok()) r.Fail("a record's candidate facts differ in count");
    return;
  }
  for (size_t i = 0; i < column.size(); ++i) set((*cands)[i], column[i]);
}

void WriteFacts(StateWriter& w, const RecordFacts& f) {
  w.U32(f.entry);
  w.I64(f.chosen);
  w.Str(f.id);
  w.U64(f.prompt_hash.hi);
  w.U64(f.prompt_hash.lo);
  WriteColumn<Hash128>(w, f, [](const CandidateFacts& c) { return c.hash; });
  WriteColumn<int>(w, f, [](const CandidateFacts& c) { return static_cast<int>(c.rank); });
  WriteColumn<uint32_t>(w, f, [](const CandidateFacts& c) { return c.chars; });
  WriteColumn<uint32_t>(w, f, [](const CandidateFacts& c) { return c.words; });
  w.U32(f.annotator_id);
  w.U32(f.thread_id);
  w.U32(f.source_id);
  w.U32(f.group_id);
  w.U32(f.prompt_chars);
  w.U8(static_cast<uint8_t>(f.shape));
}

void ReadFacts(StateReader& r, RunState& st, RecordFacts* f) {
  f->entry = r.U32();
  f->chosen = static_cast<int>(r.I64());
  f->id = r.Str();
  f->prompt_hash.hi = r.U64();
  f->prompt_hash.lo = r.U64();
  thread_local std::vector<CandidateFacts> cands;
  ReadColumn<Hash128>(r, &cands, true, [](CandidateFacts& c, const Hash128& v) { c.hash = v; });
  ReadColumn<int>(r, &cands, false, [](CandidateFacts& c, int v) { c.rank = v; });
  ReadColumn<uint32_t>(r, &cands, false, [](CandidateFacts& c, uint32_t v) { c.chars = v; });
  ReadColumn<uint32_t>(r, &cands, false, [](CandidateFacts& c, uint32_t v) { c.words = v; });
  f->cands = st.KeepCandidates(cands);
  f->annotator_id = r.U32();
  f->thread_id = r.U32();
  f->source_id = r.U32();
  f->group_id = r.U32();
  f->prompt_chars = r.U32();
  const uint8_t shape = r.U8();
  if (shape > static_cast<uint8_t>(JudgmentShape::kPairwise)) r.Fail("a judgment shape out of range");
  f->shape = static_cast<JudgmentShape>(shape);
}

std::string PartName(const Part& p) {
  return "part " + std::to_string(p.part) + " (input " + std::to_string(p.input) + ", bytes " +
         std::to_string(p.begin) + " to " + (p.end ? std::to_string(*p.end) : std::string("the end")) + ")";
}

}  // namespace

std::string ObservationFingerprint(const Plan& plan, const std::vector<std::string>& stage_names) {
  Json j;
  Json inputs = Json::array();
  for (const auto& in : plan.inputs) inputs.push_back(Json{{"name", in.name}, {"layout", in.layout_key}});
  j["inputs"] = std::move(inputs);
  j["limits"] = Json{{"max_line_bytes", plan.limits.max_line_bytes}, {"max_depth", plan.limits.max_depth},
                     {"max_candidates", plan.limits.max_candidates}, {"max_text_bytes", plan.limits.max_text_bytes},
                     {"max_reject_share", plan.limits.max_reject_share}};
  j["normalize"] = Json{{"strip_punctuation", plan.normalize.strip_punctuation}};
  j["seed"] = plan.seed;
  j["stages"] = plan.stages;
  j["run"] = stage_names;
  return Sha256Hex(j.dump());
}

ObservedRun::ObservedRun(const Plan& plan) : plan_(plan), st_(plan) {}
ObservedRun::~ObservedRun() = default;

Result<std::unique_ptr<ObservedRun>> ObservedRun::Start(const Plan& plan, const std::vector<std::string>& stage_names,
                                                        FileSystem* fs) {
  std::unique_ptr<ObservedRun> run(new ObservedRun(plan));
  run->fs_ = fs;
  run->command_stages_ = stage_names;
  if (Status s = MakeRunStages(plan, stage_names, fs, &run->stages_); !s.ok()) return s;
  for (const auto& stage : run->stages_) run->stage_names_.push_back(stage->name());
  run->ingest_.resize(plan.inputs.size());
  run->st_.inputs.resize(plan.inputs.size());
  return run;
}

Status ObservedRun::ObserveAll(FileSystem* fs) {
  return ObserveInputs(plan_, st_, stages_, fs, nullptr, nullptr);
}

Status ObservedRun::ObservePart(const Part& part, FileSystem* fs) {
  if (part_ || !merged_.empty() || !st_.entries.empty()) {
    return Status::Internal("a run observes one part only, and only before anything else");
  }
  if (part.input < plan_.inputs.size() && part.path != plan_.inputs[part.input].path) {
    return Status::Usage(PartName(part) + ": its path \"" + part.path + "\" is not input " +
                         std::to_string(part.input) + " of the plan (\"" + plan_.inputs[part.input].path + "\")");
  }
  part_ = std::make_unique<Part>(part);
  return ObserveInputs(plan_, st_, stages_, fs, part_.get(), &ingest_);
}

Result<std::string> ObservedRun::SaveToBytes() const {
  if (!part_) return Status::Internal("only the state of an observed part can be saved");
  StateWriter w;
  w.BeginSection("run");
  w.Str(ObservationFingerprint(plan_, stage_names_));
  WritePart(w, *part_);
  w.EndSection();

  w.BeginSection("input");
  WriteStats(w, st_.inputs[part_->input], ingest_[part_->input]);
  w.EndSection();

  w.BeginSection("texts");
  w.U64(st_.text_count() - 1);
  for (uint32_t id = 1; id < st_.text_count(); ++id) w.Str(st_.Text(id));
  w.EndSection();

  w.BeginSection("entries");
  w.U64(st_.entries.size());
  for (size_t i = 0; i < st_.entries.size(); ++i) {
    const Entry& e = st_.entries[i];
    const Decision& d = st_.decisions[i];
    w.U64(e.line);
    w.I64(e.record);
    w.U8(d.rejected);
    if (d.rejected) WriteReject(w, st_, d);
  }
  w.EndSection();

  w.BeginSection("records");
  w.U64(st_.records.size());
  for (const RecordFacts& f : st_.records) WriteFacts(w, f);
  w.EndSection();

  for (const auto& stage : stages_) {
    w.BeginSection(StageSection(stage->name()));
    stage->SaveObserved(w);
    w.EndSection();
  }
  return w.Finish(kKind);
}

Status ObservedRun::Save(const std::string& path, FileSystem* fs) const {
  auto bytes = SaveToBytes();
  if (!bytes.ok()) return bytes.status();
  return WriteFileAtomically(fs, path, bytes.value());
}

Status ObservedRun::Append(const std::string& path, FileSystem* fs) {
  auto bytes = ReadWholeFile(fs, path);
  if (!bytes.ok()) return bytes.status();
  return AppendBytes(std::move(bytes).value(), path);
}

void WritePart(StateWriter& w, const Part& p) {
  w.U32(p.part);
  w.U32(p.input);
  w.U64(p.begin);
  w.U8(p.end.has_value());
  w.U64(p.end.value_or(0));
  w.U64(p.first_line);
}

Part ReadPart(StateReader& r) {
  Part p;
  p.part = r.U32();
  p.input = r.U32();
  p.begin = r.U64();
  const bool has_end = r.U8() != 0;
  const uint64_t end = r.U64();
  if (has_end) p.end = end;
  p.first_line = r.U64();
  return p;
}

void WriteReject(StateWriter& w, const RunState& st, const Decision& d) {
  const RejectText& t = st.RejectTextOf(d);
  w.Str(st.StageOf(d));
  w.Str(st.ReasonOf(d));
  w.Str(t.field);
  w.Str(t.message);
  w.Str(t.detail);
  w.Str(t.id);
}

bool ReadReject(StateReader& r, RunState& st, size_t entry) {
  std::string stage = r.Str(), reason = r.Str(), field = r.Str(), message = r.Str(), detail = r.Str(), id = r.Str();
  if (!r.ok()) return false;
  st.RejectEntry(entry, stage, reason, std::move(field), std::move(message), std::move(id));
  st.reject_texts[st.decisions[entry].text].detail = std::move(detail);
  return true;
}

Status ObservedRun::CheckNextPart(const Part& part, const std::string& which) const {
  if (merged_.empty()) {
    if (part.input != 0 || part.begin != 0) {
      return Status::Usage(which + ": the first state file must be of the first part (input 0 from byte 0)");
    }
  } else {
    const Part& prev = merged_.back().part;
    if (part.part != prev.part + 1) {
      return Status::Usage(which + ": comes after part " + std::to_string(prev.part) + "; give the parts in order");
    }
    if (part.input == prev.input) {
      if (!prev.end || part.begin != *prev.end) {
        return Status::Usage(which + ": does not start where part " + std::to_string(prev.part) + " ends");
      }
    } else if (part.input != prev.input + 1 || part.begin != 0) {
      return Status::Usage(which + ": the parts must cover the inputs in order, each from byte 0");
    } else if (!ingest_[prev.input].at_file_end) {
      return Status::Usage(which + ": input " + std::to_string(prev.input) + " has bytes after part " +
                           std::to_string(prev.part) + ", its last part");
    }
  }
  const InputStats& stats = st_.inputs[part.input];
  if (part.first_line != stats.lines + 1) {
    return Status::Usage(which + ": starts at line " + std::to_string(part.first_line) + ", but the parts before "
                         "it hold " + std::to_string(stats.lines) + " line(s) of that input");
  }
  return Status::Ok();
}

void ObservedRun::AppendEntries(StateReader& r, const Part& part, uint64_t* entries_out, uint64_t* with_record) {
  const size_t entry_base = st_.entries.size(), record_base = st_.records.size();
  const uint64_t entries = r.Count(17);
  *entries_out = entries;
  for (uint64_t i = 0; i < entries && r.ok(); ++i) {
    Entry e;
    e.input = part.input;
    e.line = r.U64();
    const int64_t rec = r.I64();
    if (rec >= 0) {
      if (record_base + static_cast<uint64_t>(rec) >= kMaxEntries || entry_base + i >= kMaxEntries) {
        r.Fail("more lines than one run holds (" + std::to_string(kMaxEntries) + ")");
        break;
      }
      e.record = static_cast<int32_t>(record_base + static_cast<uint64_t>(rec));
      ++*with_record;
    }
    st_.entries.push_back(e);
    st_.decisions.emplace_back();
    if (r.U8() != 0 && !ReadReject(r, st_, entry_base + i)) break;
  }
}

void ObservedRun::AppendRecords(StateReader& r, const std::vector<uint32_t>& text_id, size_t entry_base,
                                uint64_t entries, uint64_t with_record) {
  const uint64_t records = r.Count(60);
  if (records != with_record) r.Fail("the records do not match the entries");
  for (uint64_t i = 0; i < records && r.ok(); ++i) {
    RecordFacts f;
    ReadFacts(r, st_, &f);
    uint32_t* ids[] = {&f.annotator_id, &f.thread_id, &f.source_id, &f.group_id};
    for (uint32_t* id : ids) {
      if (*id >= text_id.size()) {
        r.Fail("a text id out of range");
        *id = 0;
      }
      *id = text_id[*id];
    }
    if (f.entry >= entries) r.Fail("a record's entry out of range");
    f.entry = static_cast<uint32_t>(entry_base + f.entry);
    if (r.ok() && st_.entries[f.entry].record != static_cast<int64_t>(st_.records.size())) {
      r.Fail("a record's entry does not name it");
    }
    st_.records.push_back(std::move(f));
  }
}

Status ObservedRun::AppendBytes(std::string bytes, const std::string& path) {
  if (part_) return Status::Internal("a run that observed a part cannot merge others");
  auto opened = StateReader::Open(std::move(bytes), kKind, path);
  if (!opened.ok()) return opened.status();
  StateReader& r = opened.value();
  auto enter = [&](const std::string& name) -> Status {
    if (r.EnterSection(name)) return Status::Ok();
    return Status::Input(path + ": the state file has no section \"" + name + "\"");
  };

  // The part, and whether it is the next one.
  if (Status s = enter("run"); !s.ok()) return s;
  const std::string fingerprint = r.Str();
  Part part = ReadPart(r);
  if (Status s = r.LeaveSection(); !s.ok()) return s;
  if (fingerprint != ObservationFingerprint(plan_, stage_names_)) {
    return Status::Usage(path + ": the state file was made with another plan (inputs' layouts, limits, "
                         "normalisation, seed or stage settings differ) or other stages; observe the parts again "
                         "with this plan");
  }
  if (part.input >= plan_.inputs.size()) return Status::Usage(path + ": " + PartName(part) + " is not in this plan");
  part.path = plan_.inputs[part.input].path;
  const std::string which = path + " (" + PartName(part) + ")";
  if (Status s = CheckNextPart(part, which); !s.ok()) return s;
  InputStats& stats = st_.inputs[part.input];

  // Lines and ingest figures.
  if (Status s = enter("input"); !s.ok()) return s;
  InputStats got;
  InputIngest ingest;
  ReadStats(r, &got, &ingest);
  if (Status s = r.LeaveSection(); !s.ok()) return s;
  stats.lines += got.lines;
  stats.blank_lines += got.blank_lines;
  stats.entries += got.entries;
  stats.records += got.records;
  stats.compression = got.compression;
  ingest_[part.input].Add(ingest);

  // Texts, interned again: ids of this file -> ids of the run.
  if (Status s = enter("texts"); !s.ok()) return s;
  std::vector<uint32_t> text_id{0};
  for (uint64_t n = r.Count(8), i = 0; i < n && r.ok(); ++i) text_id.push_back(st_.InternText(r.Str()));
  if (Status s = r.LeaveSection(); !s.ok()) return s;

  // Entries (with the rejects made while reading), then records.
  const size_t entry_base = st_.entries.size(), record_base = st_.records.size();
  if (Status s = enter("entries"); !s.ok()) return s;
  uint64_t entries = 0, with_record = 0;
  AppendEntries(r, part, &entries, &with_record);
  if (Status s = r.LeaveSection(); !s.ok()) return s;
  if (Status s = enter("records"); !s.ok()) return s;
  AppendRecords(r, text_id, entry_base, entries, with_record);
  if (Status s = r.LeaveSection(); !s.ok()) return s;

  // Each stage's observed state.
  for (const auto& stage : stages_) {
    if (Status s = enter(StageSection(stage->name())); !s.ok()) return s;
    stage->Grow(st_.records.size());
    Status s = stage->AppendObserved(r, record_base);
    if (!s.ok()) return s;
    if (Status left = r.LeaveSection(); !left.ok()) return left;
  }
  merged_.push_back(MergedPart{part, entry_base, st_.entries.size() - entry_base, record_base,
                               st_.records.size() - record_base});
  return Status::Ok();
}

Status ObservedRun::CheckInputs() const {
  if (merged_.empty()) return Status::Usage("no state files to decide on");
  const Part& last = merged_.back().part;
  if (last.input + 1 != plan_.inputs.size() || !ingest_[last.input].at_file_end) {
    return Status::Usage("the state files end with " + PartName(last) + ": the parts after it are missing (the plan "
                         "has " + std::to_string(plan_.inputs.size()) + " input(s))");
  }
  for (uint32_t in = 0; in < plan_.inputs.size(); ++in) {
    if (Status s = CheckInputSanity(plan_, in, st_.inputs[in], ingest_[in]); !s.ok()) return s;
  }
  return Status::Ok();
}

Status ObservedRun::Decide(const PipelineOptions& options) {
  results_ = std::make_unique<StageResults>();
  results_->want_signatures = options.want_signatures;
  StageContext ctx{plan_, fs_, st_, *results_, options.prior};
  // --timings: each decide step's wall seconds on stderr, as `run` prints
  // them, and the process's CPU seconds in the step (all threads; on a busy
  // machine the wall time says little about the work).
  auto cpu_seconds = [] {
    struct rusage u;
    getrusage(RUSAGE_SELF, &u);
    return static_cast<double>(u.ru_utime.tv_sec + u.ru_stime.tv_sec) +
           static_cast<double>(u.ru_utime.tv_usec + u.ru_stime.tv_usec) * 1e-6;
  };
  auto last = std::chrono::steady_clock::now();
  double last_cpu = cpu_seconds();
  auto mark = [&](const std::string& step) {
    const auto now = std::chrono::steady_clock::now();
    const double cpu = cpu_seconds();
    std::fprintf(stderr, "timing: %-22s %8.3f s  cpu %8.3f s\n", step.c_str(),
                 std::chrono::duration<double>(now - last).count(), cpu - last_cpu);
    last = now;
    last_cpu = cpu;
  };
  auto gate = DecideStages(plan_, stages_, options.companion, ctx, command_stages_, &outcome_,
                           options.timings ? std::function<void(const std::string&)>(mark) : nullptr);
  if (!gate.ok()) return gate.status();
  gate_ = std::make_unique<nlohmann::ordered_json>(std::move(gate).value());
  return Status::Ok();
}

}  // namespace prefsift
