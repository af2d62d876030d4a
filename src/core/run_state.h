// RunState: the fact table and the decisions of one run (observe, decide,
// apply). Stages read facts and record decisions here; the ledger is these
// decisions counted.
//
// Every non-blank input line is an Entry and gets exactly one Decision: kept
// (with a split) or rejected (with the first stage and reason that rejected
// it). Thread-safety: Observe-time writes go to distinct indexes; Decide runs
// on one thread.
#pragma once

#include <cstdint>
#include <deque>
#include <map>
#include <set>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "core/hash.h"
#include "core/plan.h"
#include "core/candidate_store.h"

namespace prefsift {

// One input line (16 bytes: one per line, so kept small). A run holds at
// most kMaxEntries lines (RecordFacts::entry is 32-bit, a record index 31-bit);
// pass 1 stops with a limit error before it would hold more.
struct Entry {
  uint64_t line = 0;      // 1-based line number in its file
  uint32_t input = 0;
  int32_t record = -1;    // index into RunState::records, -1 when the line did not parse
};
inline constexpr uint64_t kMaxEntries = INT32_MAX;

// The texts of a reject, kept apart from Decision (RunState::RejectTextOf) so
// that a kept entry costs no string storage (docs/performance.md).
struct RejectText {
  std::string field;      // JSON Pointer at fault, when there is one
  std::string message;    // a sentence for people
  std::string detail;     // a compact JSON object with specifics, or ""
  std::string id;         // for entries that never became records: the id if it was readable
};

// 16 bytes: one per input line, so kept small (docs/performance.md). The
// stage that rejected it and the reason code are a pair interned in RunState:
// RunState::StageOf and RunState::ReasonOf read them ("" when kept).
struct Decision {
  uint32_t split = 0;          // index into RunState::split_names when kept
  uint32_t text = UINT32_MAX;  // index into RunState::reject_texts when rejected
  uint32_t why = 0;            // index of the (stage, reason) pair in RunState; 0 = ("", "")
  bool rejected = false;
};

// Small, fixed facts about one parsed record; the text itself is not kept.
// One per record, so kept small (docs/performance.md): 96 bytes, plus 32 a
// candidate in the run's CandidateStore (RunState::KeepCandidates); the
// annotator, thread, source and group are ids of texts interned in RunState
// (RunState::Text). A copy views the same candidates.
struct RecordFacts {
  uint32_t entry = 0;
  int chosen = -1;                              // single best candidate or -1
  std::string id;
  Hash128 prompt_hash;                          // normalised prompt (chat: all turns with roles)
  std::span<const CandidateFacts> cands;        // file order; in RunState's CandidateStore (or the caller's, before)
  // RunState::Text ids; 0 (= "") when absent. Set in the serial part of Observe.
  uint32_t annotator_id = 0, thread_id = 0, source_id = 0, group_id = 0;
  uint32_t prompt_chars = 0;
  JudgmentShape shape = JudgmentShape::kChoice;
};

// The candidates' dense ranks, file order.
inline std::vector<int> RanksOf(const RecordFacts& f) {
  std::vector<int> ranks;
  ranks.reserve(f.cands.size());
  for (const CandidateFacts& c : f.cands) ranks.push_back(c.rank);
  return ranks;
}

struct InputStats {
  uint64_t lines = 0, blank_lines = 0, entries = 0, records = 0, kept = 0, rejected = 0;
  std::map<std::string, uint64_t> rejected_by_reason;
  std::string compression;
};

class RunState {
 public:
  explicit RunState(const Plan& plan) : plan_(plan) {}
  RunState(const RunState&) = delete;
  RunState& operator=(const RunState&) = delete;
  const Plan& plan() const { return plan_; }

  std::vector<InputStats> inputs;
  std::vector<Entry> entries;
  std::vector<RecordFacts> records;
  std::vector<Decision> decisions;     // one per entry
  std::vector<std::string> split_names{"kept"};


  std::vector<RejectText> reject_texts;  // one per rejected entry (Decision::text)

  // Texts of records' annotator, thread, source and group (RecordFacts::*_id):
  // each distinct text is stored once. Id 0 is "". Intern is not thread-safe
  // (the pipeline calls it in input order); Text is safe for concurrent readers.
  uint32_t InternText(std::string_view s);
  // Copies a record's candidate facts into the run's store and returns the
  // kept copy (RecordFacts::cands). Not thread-safe: in input order, like
  // InternText.
  std::span<const CandidateFacts> KeepCandidates(std::span<const CandidateFacts> facts) {
    return candidates_.Keep(facts);
  }
  const std::string& Text(uint32_t id) const { return texts_[id]; }
  size_t text_count() const { return texts_.size(); }

  // The texts of a rejected entry's decision (empty texts for a kept one).
  const RejectText& RejectTextOf(const Decision& d) const;
  // The stage that rejected the entry and the reason code (docs/reasons.md);
  // "" for a kept one. The views stay valid for the run's life.
  std::string_view StageOf(const Decision& d) const { return whys_[d.why].first; }
  std::string_view ReasonOf(const Decision& d) const { return whys_[d.why].second; }

  bool IsKept(size_t record) const { return !decisions[records[record].entry].rejected; }
  Decision& DecisionOf(size_t record) { return decisions[records[record].entry]; }

  // Rejects a record unless an earlier stage already did; returns whether this
  // call rejected it. `detail` is a compact JSON object or "".
  bool Reject(size_t record, const std::string& stage, const std::string& reason, std::string message,
              std::string detail = "", std::string field = "");
  // Rejects an entry that never became a record (ingest).
  void RejectEntry(size_t entry, const std::string& stage, const std::string& reason, std::string field,
                   std::string message, std::string id = "");

  // Counts of rejects by stage and reason, in the order stages first rejected.
  const std::vector<std::pair<std::string, std::map<std::string, uint64_t>>>& rejects_by_stage() const {
    return by_stage_;
  }

 private:
  void Count(const std::string& stage, const std::string& reason);
  uint32_t InternWhy(const std::string& stage, const std::string& reason);
  const Plan& plan_;
  CandidateStore candidates_;
  std::set<std::string, std::less<>> names_;  // stage and reason names (node-based: views stay valid)
  // Decision::why: index 0 is ("", ""); views of names_. Few (one per stage and reason), so a linear search.
  std::vector<std::pair<std::string_view, std::string_view>> whys_{{std::string_view(), std::string_view()}};
  std::vector<std::pair<std::string, std::map<std::string, uint64_t>>> by_stage_;
  std::deque<std::string> texts_{std::string()};  // by id (a deque: growing never moves a text)
  // The ids of texts_ by hash, open addressing with linear probing; 0 = a free
  // slot (id 0, "", is never looked up). A power of two in size, at most half
  // full: 8-16 bytes a text instead of a hash-map node and bucket (about 40).
  std::vector<uint32_t> text_slots_;
};

}  // namespace prefsift
