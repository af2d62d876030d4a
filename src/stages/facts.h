// Common facts of a record (hashes of normalised text, lengths, judgment),
// computed once in pass 1 for every stage to read, and the normalised texts
// the facts were computed from, shown to the stages' Observe and then dropped.
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include "core/normalize.h"
#include "core/record.h"
#include "core/run_state.h"

namespace prefsift {

// The texts of one record after NormalizeForMatch with the plan's options.
// Made once per record, so no stage normalises the same text again.
struct MatchText {
  std::string prompt;                   // the whole prompt (chat: every turn, as Record::prompt), hashed for exact dedup
  std::string user_turns;               // chat only: Record::UserPromptText() normalised
  bool chat = false;
  std::vector<std::string> candidates;  // file order

  // The text prompts are matched on (near-duplicates, leakage): the plain
  // prompt, or a chat's user turns.
  std::string_view user_prompt() const { return chat ? std::string_view(user_turns) : std::string_view(prompt); }
};

// Number of Unicode code points in valid UTF-8.
uint32_t CountCodePoints(std::string_view s);
// Number of whitespace-separated words (ASCII white space and U+3000 are separators).
uint32_t CountWords(std::string_view s);
// The same counts by plain byte loops: the references of the differential
// test (tests/stages/facts_test.cc). Same results, slower.
uint32_t CountCodePointsReference(std::string_view s);
uint32_t CountWordsReference(std::string_view s);

// Facts of `rec`; fills *text with its normalised texts and *cands with its
// candidates' facts, which the result's cands views (buffers are reused).
// Thread-safe; leaves the text ids 0 (KeepRecordFacts sets them).
RecordFacts ComputeFacts(const Record& rec, const NormalizeOptions& norm, MatchText* text,
                         std::vector<CandidateFacts>* cands);

// Sets f's annotator, thread, source and group ids (RunState::InternText) and
// moves its candidates' facts into the run (RunState::KeepCandidates), so f no
// longer views ComputeFacts' buffer. Not thread-safe: the pipeline calls it in
// input order.
void KeepRecordFacts(const Record& rec, RunState& st, RecordFacts* f);

}  // namespace prefsift
