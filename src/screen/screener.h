// The personal-data screening engine: scans one UTF-8 text of a given field
// kind and returns non-overlapping findings.
//
// Method: every active rule's pattern for a field kind is compiled into one
// RE2::Set, so a text is scanned once; only the rules the Set reports are
// run again (individual RE2 objects) to find their spans; each span is checked
// by the rule's check and nearby words; overlapping spans are resolved by
// (1) higher certainty (the rule's base certainty after nearby words),
// (2) longer span, (3) earlier rule in load order, (4) earlier start. A rule
// with "beside" can only add a finding within reach of a kept finding of a
// kind it lists, so a reported one is run after the others have been
// resolved, only when such a finding exists, and only up to the last match
// that could be within reach of one.
//
// Word boundaries: patterns use RE2's \b, which is ASCII-only. After a match,
// a span whose first/last byte is an ASCII letter or digit is also refused if
// the neighbouring code point is a digit of any script, or a letter of a
// script written with spaces between words (Latin incl. extensions, Greek,
// Cyrillic, Armenian, full-width Latin). Letters of scripts written without
// spaces (CJK, kana, Hangul, Thai, ...) count as boundaries, so "電話090-1234-5678"
// is still found.
//
// Thread-safety: a built Screener is immutable; Scan() is const and may be
// called from any number of threads at once on the same object (RE2 and
// RE2::Set matching are thread-safe). Copies share the compiled rules.
#pragma once

#include <cstddef>
#include <cstdint>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "core/status.h"
#include "screen/rules.h"

namespace prefsift::screen {

struct Finding {
  std::string rule_id;  // the rule's name: kind, or kind/vendor
  FieldKind field = FieldKind::kPrompt;
  size_t begin = 0;  // byte offsets into the scanned text, [begin, end)
  size_t end = 0;
  Action action = Action::kFlag;
  double certainty = 0.0;
  std::string preview;  // MaskedPreview of the value; never the value itself
  std::string kind;     // the kind id (placeholders name it); "" means rule_id
};

struct ScreenerOptions {
  // Memory budget of each field kind's RE2::Set (RE2 gives 2/3 of it to the
  // DFA cache). Exhausting it makes Scan() return an error, never a clean result.
  int64_t set_max_mem = 64 << 20;
  // Memory budget of each rule's own RE2 object.
  int64_t rule_max_mem = 8 << 20;
  // Findings below this certainty are not reported (plan: certainty_floor).
  double certainty_floor = 0.0;
};

class Screener {
 public:
  // Compiles the rules. Errors name the rule's file, line and id.
  static Result<Screener> Build(const RuleSet& rules, const ScreenerOptions& options = {});

  // Findings sorted by begin, non-overlapping. An error only if the regex
  // engine fails (e.g. out of memory); the text is then unscreened.
  // REQUIRES: text is UTF-8 (invalid bytes are tolerated but never matched by \p{L}).
  Result<std::vector<Finding>> Scan(std::string_view text, FieldKind field) const;

  // The reference for the differential test (tests/screen/differential_test.cc):
  // no RE2::Set and no shortcut for "beside" rules; every rule of the field
  // kind is run alone over the whole text, with the same checks and overlap
  // resolution. Gives exactly Scan's findings,
  // slower. Unlike Scan it has no memory-error path (each rule's own RE2 falls
  // back to its slower engine).
  std::vector<Finding> ScanEachRule(std::string_view text, FieldKind field) const;

  size_t rule_count() const;

 private:
  struct Impl;

  explicit Screener(std::shared_ptr<const Impl> impl) : impl_(std::move(impl)) {}
  std::shared_ptr<const Impl> impl_;
};

}  // namespace prefsift::screen
