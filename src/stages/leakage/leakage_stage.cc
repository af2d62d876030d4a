#include "stages/leakage/leakage_stage.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <atomic>
#include <cmath>
#include <filesystem>

#include "core/state_file.h"
#include "core/free_memory.h"
#include "core/thread_pool.h"
#include "io/file_system.h"
#include "io/output_dir.h"
#include "stages/facts.h"
#include "stages/leakage/flat_rows.h"
#include "stages/leakage/gram_rows.h"
#include "stages/leakage/leak_index.h"
#include "stages/sparse_rows.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

const char* ReasonOf(LeakDetector d) {
  switch (d) {
    case LeakDetector::kExact: return "eval_leak_exact";
    case LeakDetector::kNgram: return "eval_leak_ngram";
    case LeakDetector::kNear: return "eval_leak_near";
    case LeakDetector::kAnswer: return "eval_leak_answer";
  }
  return "eval_leak";
}

class LeakageStage : public Stage {
 public:
  // Keeps of `corpus` only what the reports name (the sets, each item's id
  // and set): the index holds what the detectors need.
  LeakageStage(const EvalCorpus& corpus, std::unique_ptr<LeakIndex> index, unsigned threads)
      : sets_(corpus.sets), index_(std::move(index)), threads_(threads) {
    size_t id_chars = 0;
    for (const EvalItem& item : corpus.items) id_chars += item.id.size();
    item_ids_.Reserve(corpus.items.size(), id_chars);
    item_set_.reserve(corpus.items.size());
    for (const EvalItem& item : corpus.items) {
      item_ids_.Add(item.id);
      item_set_.push_back(item.set);
    }
    if (index_->PromptGrams()) prompt_df_ = std::make_unique<std::atomic<uint32_t>[]>(index_->PromptGrams());
    if (index_->AnswerGrams()) answer_df_ = std::make_unique<std::atomic<uint32_t>[]>(index_->AnswerGrams());
    index_->ReleaseMatchTables();  // made again at ObserveDone (EndCollect)
  }
  std::string name() const override { return "leakage"; }

  void Reserve(size_t n) override {
    findings_.reserve(n);
    grams_.reserve(n);
  }
  void Grow(size_t n) override {
    if (findings_.size() < n) findings_.resize(n);
    if (grams_.size() < n) grams_.resize(n);
  }

  void Observe(size_t record, const Record& rec, const RecordFacts&, const MatchText& text) override {
    std::vector<LeakFinding> f;
    const std::string user_text = rec.prompt_is_chat ? rec.UserPromptText() : std::string();
    const std::string_view raw = rec.prompt_is_chat ? std::string_view(user_text) : std::string_view(rec.prompt);
    thread_local std::string gram_store;  // the prompt normalised for the n-gram and near detectors, once
    const LeakIndex::PromptTexts texts = index_->Texts(raw, text.user_prompt(), &gram_store);
    index_->CheckPrompt(texts, false, &f, /*with_ngram=*/false);
    thread_local std::vector<uint32_t> ids, prompt, answer, ends;
    prompt.clear();
    answer.clear();
    ends.clear();
    if (prompt_df_) {
      index_->CollectPromptGrams(texts, &ids);
      for (uint32_t id : ids) prompt_df_[id].fetch_add(1, std::memory_order_relaxed);
      prompt = ids;
      index_->DropEvalTemplatePromptGrams(&prompt);  // counted above; never matched, so not kept
    }
    bool answer_found = false;
    for (size_t c = 0; c < rec.candidates.size() && c < text.candidates.size(); ++c) {
      if (!answer_found) {
        size_t before = f.size();
        index_->CheckAnswer(rec.candidates[c], text.candidates[c], static_cast<int>(c), &f, /*with_ngram=*/false);
        answer_found = f.size() > before;  // one answer finding a record is enough
      }
      if (answer_df_) {
        index_->CollectAnswerGrams(rec.candidates[c], text.candidates[c], &ids);
        for (uint32_t id : ids) answer_df_[id].fetch_add(1, std::memory_order_relaxed);
        index_->DropEvalTemplateAnswerGrams(&ids);
        if (!ids.empty()) {
          answer.insert(answer.end(), ids.begin(), ids.end());
          ends.insert(ends.end(), {static_cast<uint32_t>(c), static_cast<uint32_t>(answer.size())});
        }
      }
    }
    answer_docs_.fetch_add(rec.candidates.size(), std::memory_order_relaxed);
    if (!f.empty()) findings_.Set(record, std::move(f));
    if (!prompt.empty() || !answer.empty()) grams_.Set(record, prompt, answer, ends);
  }

  // Pass 1 made every exact, near and exact-answer finding, and counted the
  // training frequencies the n-gram and answer findings need: make those now
  // and free the whole index before any stage decides.
  void ObserveDone(const RunState& run) override {
    EndPass1();
    if (end_status_.ok()) FinishGrams(run.records.size());
  }

  // Once, at the end of pass 1 (ObserveDone, or Decide when that was not
  // called): the check tables go, the n-gram item lists and texts come back.
  void EndPass1() {
    if (pass1_ended_) return;
    pass1_ended_ = true;
    index_->ReleaseCheckTables();
    ReturnFreeMemory();  // their pages leave the process before EndCollect makes the n-gram tables again
    end_status_ = index_->EndCollect();
  }

  void SaveObserved(StateWriter& out) const override;
  Status AppendObserved(StateReader& in, size_t first_record) override;

  // Once: the n-gram and answer findings, then nothing looks up the index
  // again: keep the template-text summary, then free the tables and the
  // normalised evaluation texts (only the items' ids and sets are reported
  // from here on).
  void FinishGrams(size_t records) {
    if (template_json_) return;
    DecideGrams(records);
    template_json_ = std::make_unique<Json>();
    index_->TemplateJson(20, template_json_.get());
    index_->ReleaseTables();
    prompt_df_.reset();
    answer_df_.reset();
  }

  // The n-gram and answer findings, once the training frequencies are known.
  void DecideGrams(size_t records) {
    const uint32_t pg = index_->PromptGrams(), ag = index_->AnswerGrams();
    std::vector<uint32_t> pdf(pg), adf(ag);
    for (uint32_t i = 0; i < pg; ++i) pdf[i] = prompt_df_[i].load();
    for (uint32_t i = 0; i < ag; ++i) adf[i] = answer_df_[i].load();
    prompt_df_.reset();  // copied: free the counters before the findings are made
    answer_df_.reset();
    index_->SetTrainingFrequencies(std::move(pdf), records, std::move(adf), answer_docs_.load());
    // Each record's findings from its own row only, so records are decided
    // side by side (the index is read-only here; SparseRows takes distinct
    // rows from several threads): the same findings on any number of threads.
    ThreadPool pool(threads_);
    pool.ParallelFor(std::min(records, grams_.size()), [&](size_t r, unsigned) {
      if (!grams_.Has(r)) return;  // no informative gram: no n-gram or answer finding
      const GramRow g = grams_[r];
      LeakFinding f;
      if (!g.prompt().empty() && index_->MatchPromptGrams(g.prompt(), &f)) {
        // After exact (detector order: exact, ngram, near, answer).
        auto& mine = findings_.Mutable(r);
        auto at = std::find_if(mine.begin(), mine.end(), [](const LeakFinding& x) { return x.detector != LeakDetector::kExact; });
        mine.insert(at, std::move(f));
      }
      const auto& fs = findings_[r];
      const bool have_answer = std::any_of(fs.begin(), fs.end(), [](const LeakFinding& x) { return x.detector == LeakDetector::kAnswer; });
      uint32_t from = 0;
      const auto answer = g.answer();
      for (size_t k = 0; k < g.answer_count(); ++k) {
        const auto [cand, end] = g.answer_end(k);
        if (have_answer) break;
        LeakFinding a;
        if (index_->MatchAnswerGrams(answer.subspan(from, end - from), static_cast<int>(cand), &a)) {
          findings_.Mutable(r).push_back(std::move(a));
          break;
        }
        from = end;
      }
    });
    grams_.clear();
  }

  Json FindingJson(const LeakFinding& f) const {
    Json j;
    j["detector"] = LeakDetectorName(f.detector);
    j["eval_set"] = SetName(f.item);
    j["eval_item"] = ItemId(f.item);
    j["measure"] = f.measure;
    if (f.detector == LeakDetector::kNear || std::string(f.measure) == "coverage") {
      j["score"] = std::round(f.score * 1000.0) / 1000.0;
    }
    if (f.shared) j["shared_grams"] = f.shared;
    if (f.candidate >= 0) j["candidate"] = f.candidate;
    j["span"] = f.span;
    return j;
  }

  Status Decide(StageContext& ctx) override {
    RunState& st = ctx.run;
    const LeakSettings& s = index_->settings();
    records_ = st.records.size();
    EndPass1();
    if (!end_status_.ok()) return end_status_;
    FinishGrams(st.records.size());
    for (size_t r = 0; r < st.records.size() && r < findings_.size(); ++r) {
      const auto& fs = findings_[r];
      if (fs.empty()) continue;
      contaminated_.push_back(r);
      const LeakFinding* drop = nullptr;
      for (const auto& f : fs) {
        if (s.policy[static_cast<int>(f.detector)] == LeakPolicy::kDrop) {
          drop = &f;
          break;
        }
      }
      std::string action = "flagged";
      if (drop) {
        const std::string& set = SetName(drop->item);
        std::string what = drop->detector == LeakDetector::kAnswer
                               ? "candidate " + std::to_string(drop->candidate) + " matches the reference answer of"
                               : "the prompt matches";
        std::string how = drop->detector == LeakDetector::kExact   ? "exactly after normalisation"
                          : drop->detector == LeakDetector::kNgram ? (std::string(drop->measure) == "coverage"
                                                                          ? "covering " + std::to_string(static_cast<int>(std::floor(drop->score * 100 + 1e-6))) +
                                                                                "% of the item's non-template words with shared word " +
                                                                                std::to_string(index_->ngram_n()) + "-grams"
                                                                          : "sharing a word " + std::to_string(index_->ngram_n()) + "-gram")
                          : drop->detector == LeakDetector::kNear  ? std::string("by MinHash ") + drop->measure
                                                                   : std::string("(") + drop->measure + ")";
        Json detail = FindingJson(*drop);
        detail.erase("span");
        if (st.Reject(r, name(), ReasonOf(drop->detector),
                      what + " evaluation item " + ItemId(drop->item) + " of set " + set + " (" +
                          LeakDetectorName(drop->detector) + " detector, " + how + ")",
                      detail.dump())) {
          action = "dropped";
          ++dropped_;
        } else {
          action = "rejected earlier by " + std::string(st.StageOf(st.DecisionOf(r)));
        }
      } else if (!st.IsKept(r)) {
        action = "rejected earlier by " + std::string(st.StageOf(st.DecisionOf(r)));
      } else {
        ++flagged_;
      }
      actions_.push_back(action);
    }
    return Status::Ok();
  }

  // Contaminated records with at least one finding of detector d against set si.
  uint64_t RecordsWith(size_t si, int d) const {
    uint64_t count = 0;
    for (size_t r : contaminated_) {
      for (const auto& f : findings_[r]) {
        if (static_cast<int>(f.detector) != d || item_set_[f.item] != si) continue;
        ++count;
        break;
      }
    }
    return count;
  }

  void Figures(const RunState&, GateFigures* g) const override {
    const LeakSettings& s = index_->settings();
    g->leakage_none_flagged = flagged_ == 0;
    for (size_t si = 0; si < sets_.size(); ++si) {
      double rate = 0;
      for (int d = 0; d < kLeakDetectors; ++d) {
        if (!s.enabled[d]) continue;
        rate = std::max(rate, records_ ? double(RecordsWith(si, d)) / double(records_) : 0.0);
      }
      g->leakage_by_set.push_back({sets_[si].spec.name, rate});
    }
  }

  void Report(const RunState& st, Json* sec) const override {
    const LeakSettings& s = index_->settings();
    Json sets = Json::array();
    for (const auto& set : sets_) {
      sets.push_back(Json{{"name", set.spec.name}, {"path", set.spec.path}, {"format", EvalFormatName(set.spec.format)},
                          {"items", set.items}, {"with_reference", set.with_reference}});
    }
    (*sec)["eval_sets"] = std::move(sets);
    Json det;
    LeakSettingsToJson(s, index_->ngram_n(), &det);
    (*sec)["detectors"] = std::move(det);
    Json tmpl;
    if (template_json_) tmpl = *template_json_;
    else if (pass1_ended_ && end_status_.ok()) index_->TemplateJson(20, &tmpl);  // (the item lists are back)
    (*sec)["template_text"] = std::move(tmpl);
    (*sec)["records_checked"] = records_;
    (*sec)["contaminated_records"] = contaminated_.size();
    (*sec)["contaminated_rate"] = records_ ? double(contaminated_.size()) / double(records_) : 0.0;
    (*sec)["dropped"] = dropped_;
    (*sec)["flagged"] = flagged_;
    // Per set and detector: records with at least one finding of that detector against that set.
    Json by_set = Json::object();
    for (size_t si = 0; si < sets_.size(); ++si) {
      Json per = Json::object();
      for (int d = 0; d < kLeakDetectors; ++d) {
        if (!s.enabled[d]) continue;
        const uint64_t count = RecordsWith(si, d);
        Json examples = Json::array();
        for (size_t r : contaminated_) {
          if (examples.size() >= s.examples) break;
          for (const auto& f : findings_[r]) {
            if (static_cast<int>(f.detector) != d || item_set_[f.item] != si) continue;
            examples.push_back(Json{{"id", st.records[r].id}, {"eval_item", ItemId(f.item)},
                                    {"span", f.span}});
            break;
          }
        }
        per[LeakDetectorName(static_cast<LeakDetector>(d))] =
            Json{{"records", count}, {"rate", records_ ? double(count) / double(records_) : 0.0},
                 {"examples", std::move(examples)}};
      }
      by_set[sets_[si].spec.name] = std::move(per);
    }
    (*sec)["by_set"] = std::move(by_set);
    (*sec)["report_file"] = "leakage.jsonl";
  }

  Status WriteOutputs(const RunState& st, OutputDir& out) const override {
    auto f = out.Create("leakage.jsonl");
    if (!f.ok()) return f.status();
    for (size_t k = 0; k < contaminated_.size(); ++k) {
      size_t r = contaminated_[k];
      const RecordFacts& rf = st.records[r];
      const Entry& e = st.entries[rf.entry];
      Json j;
      j["id"] = rf.id;
      j["input"] = st.plan().inputs[e.input].name;
      j["line"] = e.line;
      j["action"] = actions_[k];
      Json m = Json::array();
      for (const auto& fd : findings_[r]) m.push_back(FindingJson(fd));
      j["matches"] = std::move(m);
      Status s = f.value()->Append(j.dump() + "\n");
      if (!s.ok()) return s;
    }
    return f.value()->Close();
  }

 private:
  std::string ItemId(uint32_t item) const { return std::string(item_ids_[item]); }
  const std::string& SetName(uint32_t item) const { return sets_[item_set_[item]].spec.name; }

  std::vector<EvalSetInfo> sets_;
  FlatStrings item_ids_;            // per evaluation item: its id within its set
  std::vector<uint32_t> item_set_;  // per evaluation item: its set
  std::unique_ptr<LeakIndex> index_;
  unsigned threads_ = 0;  // the plan's (0: one per hardware thread), for the decide's parallel loop
  // Per record: the evaluation gram ids its prompt and candidates hold (pass
  // 1), dropped in Decide. answer_ends: (candidate, end offset in `answer`).
  GramRows grams_;  // only records holding an informative gram have a row
  std::unique_ptr<std::atomic<uint32_t>[]> prompt_df_, answer_df_;
  std::atomic<uint64_t> answer_docs_{0};
  SparseRows<std::vector<LeakFinding>> findings_;  // only records with a finding
  std::unique_ptr<Json> template_json_;  // made at the end of Decide, before the tables are freed
  bool pass1_ended_ = false;
  Status end_status_;                     // of EndCollect, returned by Decide
  std::vector<size_t> contaminated_;
  std::vector<std::string> actions_;
  uint64_t records_ = 0, dropped_ = 0, flagged_ = 0;
};

// Without evaluation sets there is nothing to check: the stage only says so.
class NoEvalSetsStage : public Stage {
 public:
  std::string name() const override { return "leakage"; }
  Status Decide(StageContext&) override { return Status::Ok(); }
  void Report(const RunState&, Json* sec) const override {
    (*sec)["skipped"] = "no evaluation sets: name them under stages.leakage.eval_sets (docs/leakage.md)";
  }
};

}  // namespace

std::unique_ptr<Stage> MakeLeakageStage(const Plan& plan, FileSystem* fs, Status* error) {
  std::string base = plan.plan_path.empty() ? "" : std::filesystem::path(plan.plan_path).parent_path().string();
  auto settings = ParseLeakSettings(StageSettings(plan, "leakage"), base, "stages.leakage", false);
  if (!settings.ok()) {
    *error = settings.status();
    return nullptr;
  }
  if (settings.value().eval_sets.empty()) return std::make_unique<NoEvalSetsStage>();
  auto corpus = LoadEvalSets(settings.value().eval_sets, fs, plan.limits);
  if (!corpus.ok()) {
    *error = corpus.status();
    return nullptr;
  }
  auto index = LeakIndex::Build(corpus.value(), settings.value(), plan.normalize, plan.threads);
  if (!index.ok()) {
    *error = index.status();
    return nullptr;
  }
  // The evaluation texts as read are freed here (with `corpus`): the index
  // holds its own normalised copy.
  return std::make_unique<LeakageStage>(corpus.value(), std::move(index).value(), plan.threads);
}

}  // namespace prefsift

// Observed state (state files, docs/parts.md): each record's findings
// of the exact and near detectors, the evaluation grams its prompt and
// candidates hold, and the grams' training frequencies so far (summed over parts).
namespace prefsift {
namespace {

// LeakFinding::measure points at one of these texts.
const char* const kMeasures[] = {"", "exact", "ngram", "coverage", "normalised_text", "jaccard", "containment"};

void LeakageStage::SaveObserved(StateWriter& out) const {
  const uint32_t pg = index_->PromptGrams(), ag = index_->AnswerGrams();
  std::vector<uint32_t> pdf(pg), adf(ag);
  for (uint32_t i = 0; i < pg; ++i) pdf[i] = prompt_df_[i].load();
  for (uint32_t i = 0; i < ag; ++i) adf[i] = answer_df_[i].load();
  out.Vec(pdf);
  out.Vec(adf);
  out.U64(answer_docs_.load());
  out.U64(findings_.size());
  for (size_t r = 0; r < findings_.size(); ++r) {
    out.U64(findings_[r].size());
    for (const LeakFinding& f : findings_[r]) {
      out.U8(static_cast<uint8_t>(f.detector));
      out.U32(f.item);
      out.F32(f.score);
      out.U32(f.shared);
      out.Str(f.measure);
      out.I64(f.candidate);
      out.Str(f.span);
    }
    const GramRow g = r < grams_.size() ? grams_[r] : GramRow();  // (empty for a record without a row)
    out.Vec(std::vector<uint32_t>(g.prompt().begin(), g.prompt().end()));
    out.Vec(std::vector<uint32_t>(g.answer().begin(), g.answer().end()));
    out.Vec(std::vector<uint32_t>(g.ends().begin(), g.ends().end()));
  }
}

Status LeakageStage::AppendObserved(StateReader& in, size_t first) {
  const uint32_t pg = index_->PromptGrams(), ag = index_->AnswerGrams();
  std::vector<uint32_t> pdf, adf;
  in.Vec(&pdf);
  in.Vec(&adf);
  if (pdf.size() != pg || adf.size() != ag) in.Fail("made with other evaluation sets or settings");
  for (uint32_t i = 0; i < pg && in.ok(); ++i) prompt_df_[i].fetch_add(pdf[i], std::memory_order_relaxed);
  for (uint32_t i = 0; i < ag && in.ok(); ++i) answer_df_[i].fetch_add(adf[i], std::memory_order_relaxed);
  answer_docs_.fetch_add(in.U64(), std::memory_order_relaxed);
  const uint64_t n = in.Count(8);
  findings_.resize(first + n);
  grams_.resize(first + n);
  for (size_t r = first; r < first + n && in.ok(); ++r) {
    std::vector<LeakFinding> found(in.Count(33));
    for (LeakFinding& f : found) {
      const uint8_t d = in.U8();
      if (d >= kLeakDetectors) in.Fail("a detector code out of range");
      f.detector = static_cast<LeakDetector>(d);
      f.item = in.U32();
      if (f.item >= item_set_.size() && in.ok()) in.Fail("a finding of an evaluation item this plan does not load");
      f.score = in.F32();
      f.shared = in.U32();
      const std::string measure = in.Str();
      f.measure = nullptr;
      for (const char* m : kMeasures) {
        if (measure == m) f.measure = m;
      }
      if (!f.measure) {
        f.measure = "";
        in.Fail("an unknown measure \"" + measure + "\"");
      }
      f.candidate = static_cast<int>(in.I64());
      f.span = in.Str();
    }
    std::vector<uint32_t> prompt, answer, ends;
    in.Vec(&prompt);
    in.Vec(&answer);
    in.Vec(&ends);
    if (ends.size() % 2 != 0) in.Fail("an odd list of answer ends");
    for (size_t k = 0; k + 1 < ends.size(); k += 2) {
      if (ends[k + 1] > answer.size() && in.ok()) in.Fail("an answer end out of range");
    }
    for (uint32_t id : prompt) {
      if (id >= pg && in.ok()) in.Fail("a prompt gram id out of range");
    }
    for (uint32_t id : answer) {
      if (id >= ag && in.ok()) in.Fail("an answer gram id out of range");
    }
    if (ends.size() % 2 != 0) ends.pop_back();
    if (found.empty()) {
      findings_.Reset(r);
    } else {
      findings_.Set(r, std::move(found));
    }
    if (prompt.empty() && answer.empty()) {
      grams_.Reset(r);
    } else {
      grams_.Set(r, prompt, answer, ends);
    }
  }
  return Status::Ok();
}

}  // namespace
}  // namespace prefsift
