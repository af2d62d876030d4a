#include "stages/leakage.h"

#include <nlohmann/json.hpp>

#include <cmath>
#include <filesystem>

#include "io/file_system.h"
#include "io/output_dir.h"
#include "stages/facts.h"
#include "stages/leak_index.h"

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
  LeakageStage(std::unique_ptr<EvalCorpus> corpus, std::unique_ptr<LeakIndex> index)
      : corpus_(std::move(corpus)), index_(std::move(index)) {}
  std::string name() const override { return "leakage"; }

  void Reserve(size_t n) override { findings_.reserve(n); }
  void Grow(size_t n) override {
    if (findings_.size() < n) findings_.resize(n);
  }

  void Observe(size_t record, const Record& rec, const RecordFacts&, const MatchText& text) override {
    std::vector<LeakFinding> f;
    if (rec.prompt_is_chat) {
      index_->CheckPrompt(rec.UserPromptText(), text.user_prompt(), false, &f);
    } else {
      index_->CheckPrompt(rec.prompt, text.user_prompt(), false, &f);
    }
    for (size_t c = 0; c < rec.candidates.size() && c < text.candidates.size(); ++c) {
      size_t before = f.size();
      index_->CheckAnswer(rec.candidates[c], text.candidates[c], static_cast<int>(c), &f);
      if (f.size() > before) break;  // one answer finding a record is enough
    }
    findings_[record] = std::move(f);
  }

  Json FindingJson(const LeakFinding& f) const {
    const EvalItem& item = corpus_->items[f.item];
    Json j;
    j["detector"] = LeakDetectorName(f.detector);
    j["eval_set"] = corpus_->sets[item.set].spec.name;
    j["eval_item"] = item.id;
    j["measure"] = f.measure;
    if (f.detector == LeakDetector::kNear) j["score"] = std::round(f.score * 1000.0) / 1000.0;
    if (f.shared) j["shared_grams"] = f.shared;
    if (f.candidate >= 0) j["candidate"] = f.candidate;
    j["span"] = f.span;
    return j;
  }

  Status Decide(RunState& st) override {
    const LeakSettings& s = index_->settings();
    records_ = st.records.size();
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
        const EvalItem& item = corpus_->items[drop->item];
        const std::string& set = corpus_->sets[item.set].spec.name;
        std::string what = drop->detector == LeakDetector::kAnswer
                               ? "candidate " + std::to_string(drop->candidate) + " matches the reference answer of"
                               : "the prompt matches";
        std::string how = drop->detector == LeakDetector::kExact   ? "exactly after normalisation"
                          : drop->detector == LeakDetector::kNgram ? (std::string(drop->measure) == "whole_item"
                                                                          ? "containing the whole (short) item"
                                                                          : "sharing a word " + std::to_string(index_->ngram_n()) + "-gram")
                          : drop->detector == LeakDetector::kNear  ? std::string("by MinHash ") + drop->measure
                                                                   : std::string("(") + drop->measure + ")";
        Json detail = FindingJson(*drop);
        detail.erase("span");
        if (st.Reject(r, name(), ReasonOf(drop->detector),
                      what + " evaluation item " + item.id + " of set " + set + " (" + LeakDetectorName(drop->detector) +
                          " detector, " + how + ")",
                      detail.dump())) {
          action = "dropped";
          ++dropped_;
        } else {
          action = "rejected earlier by " + std::string(st.DecisionOf(r).stage);
        }
      } else if (!st.IsKept(r)) {
        action = "rejected earlier by " + std::string(st.DecisionOf(r).stage);
      } else {
        ++flagged_;
      }
      actions_.push_back(action);
    }
    return Status::Ok();
  }

  void Report(const RunState& st, Json* sec) const override {
    const LeakSettings& s = index_->settings();
    Json sets = Json::array();
    for (const auto& set : corpus_->sets) {
      sets.push_back(Json{{"name", set.spec.name}, {"path", set.spec.path}, {"format", EvalFormatName(set.spec.format)},
                          {"items", set.items}, {"with_reference", set.with_reference}});
    }
    (*sec)["eval_sets"] = std::move(sets);
    Json det;
    LeakSettingsToJson(s, index_->ngram_n(), &det);
    (*sec)["detectors"] = std::move(det);
    (*sec)["records_checked"] = records_;
    (*sec)["contaminated_records"] = contaminated_.size();
    (*sec)["contaminated_rate"] = records_ ? double(contaminated_.size()) / double(records_) : 0.0;
    (*sec)["dropped"] = dropped_;
    (*sec)["flagged"] = flagged_;
    // Per set and detector: records with at least one finding of that detector against that set.
    Json by_set = Json::object();
    for (size_t si = 0; si < corpus_->sets.size(); ++si) {
      Json per = Json::object();
      for (int d = 0; d < kLeakDetectors; ++d) {
        if (!s.enabled[d]) continue;
        uint64_t count = 0;
        Json examples = Json::array();
        for (size_t r : contaminated_) {
          for (const auto& f : findings_[r]) {
            if (static_cast<int>(f.detector) != d || corpus_->items[f.item].set != si) continue;
            ++count;
            if (examples.size() < s.examples) {
              examples.push_back(Json{{"id", st.records[r].id}, {"eval_item", corpus_->items[f.item].id},
                                      {"span", f.span}});
            }
            break;
          }
        }
        per[LeakDetectorName(static_cast<LeakDetector>(d))] =
            Json{{"records", count}, {"rate", records_ ? double(count) / double(records_) : 0.0},
                 {"examples", std::move(examples)}};
      }
      by_set[corpus_->sets[si].spec.name] = std::move(per);
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
  std::unique_ptr<EvalCorpus> corpus_;
  std::unique_ptr<LeakIndex> index_;
  std::vector<std::vector<LeakFinding>> findings_;
  std::vector<size_t> contaminated_;
  std::vector<std::string> actions_;
  uint64_t records_ = 0, dropped_ = 0, flagged_ = 0;
};

// Without evaluation sets there is nothing to check: the stage only says so.
class NoEvalSetsStage : public Stage {
 public:
  std::string name() const override { return "leakage"; }
  Status Decide(RunState&) override { return Status::Ok(); }
  void Report(const RunState&, Json* sec) const override {
    (*sec)["skipped"] = "no evaluation sets: name them under stages.leakage.eval_sets (docs/leakage.md)";
  }
};

}  // namespace

std::unique_ptr<Stage> MakeLeakageStage(const Plan& plan, Status* error) {
  std::string base = plan.plan_path.empty() ? "" : std::filesystem::path(plan.plan_path).parent_path().string();
  auto settings = ParseLeakSettings(StageSettings(plan, "leakage"), base, "stages.leakage", false);
  if (!settings.ok()) {
    *error = settings.status();
    return nullptr;
  }
  if (settings.value().eval_sets.empty()) return std::make_unique<NoEvalSetsStage>();
  auto corpus = LoadEvalSets(settings.value().eval_sets, DefaultFileSystem(), plan.limits);
  if (!corpus.ok()) {
    *error = corpus.status();
    return nullptr;
  }
  auto owned = std::make_unique<EvalCorpus>(std::move(corpus).value());
  auto index = LeakIndex::Build(*owned, settings.value(), plan.normalize);
  if (!index.ok()) {
    *error = index.status();
    return nullptr;
  }
  return std::make_unique<LeakageStage>(std::move(owned), std::move(index).value());
}

}  // namespace prefsift
