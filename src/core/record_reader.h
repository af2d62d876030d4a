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
};

struct RejectReason {
  std::string code;     // e.g. "not_json", "missing_field" (docs/reasons.md)
  std::string field;    // the JSON Pointer at fault, or "" for the whole line
  std::string message;  // one sentence a person can act on
  std::string id;       // the record's id when it could be read, else ""
};

class RecordReader {
 public:
  RecordReader(const Layout& layout, const InputLimits& limits);
  ~RecordReader();
  RecordReader(const RecordReader&) = delete;
  RecordReader& operator=(const RecordReader&) = delete;

  // Returns true and fills *rec, or false and fills *why. `default_id` is used
  // when the layout has no id pointer.
  bool Read(std::string_view line, const std::string& default_id, Record* rec, RejectReason* why);

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

}  // namespace prefsift
