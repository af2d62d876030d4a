// Normalisation for matching. Never applied to what is written out.
//
// Steps, in order (docs/normalisation.md):
//   1. Unicode NFKC with full case folding, dropping default-ignorable code
//      points (utf8proc: STABLE|COMPOSE|COMPAT|CASEFOLD|IGNORE). Pure-ASCII
//      text takes an exact fast path (ASCII lowercase, in 64-byte blocks:
//      core/normalize_ascii.h).
//   1b. Look-alike punctuation becomes ASCII: curly and low single quotes,
//      primes and the modifier apostrophe become ', curly/low double quotes,
//      double primes and guillemets become ", hyphen and dash variants and the
//      minus sign become - (NFKC already maps full-width forms and the ellipsis).
//   2. Optional: remove punctuation (Unicode general categories Pc Pd Ps Pe Pi Pf Po).
//   3. Whitespace folding: every run of Unicode white space (categories Zs Zl
//      Zp and the ASCII controls TAB LF VT FF CR) becomes one U+0020; leading
//      and trailing white space is removed.
// REQUIRES: valid UTF-8 input (ingest validates every line first).
// Thread-safe: pure functions.
#pragma once

#include <string>
#include <string_view>

namespace prefsift {

struct NormalizeOptions {
  bool strip_punctuation = false;
};

std::string NormalizeForMatch(std::string_view text, const NormalizeOptions& options = {});
// The same text into *out, reusing its buffer (no allocation when it is
// large enough). REQUIRES: out does not alias text.
void NormalizeForMatchInto(std::string_view text, const NormalizeOptions& options, std::string* out);

// Step 1 only, without case folding (NFKC as defined by UAX #15); exposed for
// the conformance test against the Unicode Consortium's NormalizationTest.txt.
std::string NfkcOnly(std::string_view text);

// True when `text` is well-formed UTF-8 (no overlong forms, no surrogates,
// nothing above U+10FFFF).
bool IsValidUtf8(std::string_view text);

}  // namespace prefsift
