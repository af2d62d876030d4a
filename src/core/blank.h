// IsBlank: is a text (a line, a prompt, a candidate) only white space? The one
// definition used by the record reader (empty prompts and candidates), the
// pipeline and the evaluation-set reader (blank lines are skipped) and the
// surface features (blank lines between paragraphs).
// Thread-safety: a pure function.
#pragma once

#include <string_view>

namespace prefsift {

// True when every byte is a space, tab, carriage return or line feed (also
// for the empty text). Other white space (form feed, vertical tab, no-break
// space) is not blank.
inline bool IsBlank(std::string_view s) {
  for (char c : s) {
    if (c != ' ' && c != '\t' && c != '\r' && c != '\n') return false;
  }
  return true;
}

}  // namespace prefsift
