// HTML text escaping for the report pages (report.html and its sections).
// Thread-safety: a pure function.
#pragma once

#include <string>

namespace prefsift {

// Escapes &, <, > and " so any text is safe inside an element or a quoted attribute.
inline std::string Esc(const std::string& s) {
  std::string o;
  o.reserve(s.size());
  for (char c : s) {
    switch (c) {
      case '&': o += "&amp;"; break;
      case '<': o += "&lt;"; break;
      case '>': o += "&gt;"; break;
      case '"': o += "&quot;"; break;
      default: o += c;
    }
  }
  return o;
}

}  // namespace prefsift
