// RecordReader: one JSONL line -> a Record through a Layout, or a reject reason.
//
// Validates: JSON syntax and UTF-8 (simdjson), nesting depth, the types of
// every field the layout names, B >= 2, the judgment (choice in range, a
// ranking that is a ranking), non-empty texts, and the configured limits.
// Nothing is repaired: a record that fails any check is rejected with a reason
// code (docs/reasons.md) and the JSON Pointer of the field at fault.
// Thread-safety: one RecordReader per thread (it owns a parser).
#pragma once

#include <memory>
#include <string>
#include <string_view>

#include "core/layout.h"
#include "core/record.h"

namespace prefsift {

struct InputLimits {
  size_t max_line_bytes = 64u << 20;   // longer lines are rejected unread (line_too_long)
  size_t max_depth = 128;              // JSON nesting depth (json_too_deep)
  size_t max_candidates = 256;         // B above this is rejected (too_many_candidates)
  size_t max_text_bytes = 4u << 20;    // any one prompt or candidate text (text_too_long)
  // The run stops (exit 8) when one ingest reason rejects more than this share
  // of a file's records: that is almost always a layout mistake.
  double max_reject_share = 0.5;
};

struct RejectReason {
  std::string code;     // e.g. "not_json", "missing_field" (docs/reasons.md)
  std::string field;    // the JSON Pointer at fault, or "" for the whole line
  std::string message;  // one sentence a person can act on
  std::string id;       // the record's id when it could be read, else ""
};

// What the judgments read so far say about the numbering base, for a layout
// that does not state it (docs/layouts.md, "Choice and rank base"). Counted
// whether or not the record was accepted.
struct BaseEvidence {
  uint64_t judgments = 0;     // choices or orders or rankings seen
  uint64_t first_slot = 0;    // a choice (or order entry) of 0
  uint64_t past_last = 0;     // a choice (or order entry) equal to B: out of range 0-based, the last slot 1-based
  uint64_t best_rank_0 = 0;   // a ranking whose smallest rank is 0
  uint64_t best_rank_1 = 0;   // a ranking whose smallest rank is 1
  void Add(const BaseEvidence& o) {
    judgments += o.judgments;
    first_slot += o.first_slot;
    past_last += o.past_last;
    best_rank_0 += o.best_rank_0;
    best_rank_1 += o.best_rank_1;
  }
};

class RecordReader {
 public:
  RecordReader(const Layout& layout, const InputLimits& limits);
  ~RecordReader();
  RecordReader(const RecordReader&) = delete;
  RecordReader& operator=(const RecordReader&) = delete;

  // Returns true and fills *rec, or false and fills *why. `default_id` is used
  // when the layout has no id pointer. `padded`: at least kPadding readable
  // bytes follow the line in memory (any values), so the parser reads it in
  // place instead of copying it first.
  bool Read(std::string_view line, const std::string& default_id, Record* rec, RejectReason* why,
            bool padded = false);
  static constexpr size_t kPadding = 64;

  // Evidence about the numbering base from every Read so far.
  const BaseEvidence& base_evidence() const;

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

}  // namespace prefsift
