// The ASCII path of matching normalisation (core/normalize.h), apart for the
// tests and benchmarks that compare it with its reference. NormalizeForMatch
// sends pure-ASCII text here: ASCII lowercase, every run of white space
// between two kept bytes becomes one ' ' (none leading or trailing), and
// punctuation is removed when asked (without breaking or making a run of
// white space). Why that equals the general path for ASCII is said in
// NormalizeForMatchInto (core/normalize.cc).
//
// FoldAscii works on 64-byte blocks: bit masks of the blocks' white space and
// punctuation (core/byte_block.h), then the kept bytes copied in runs.
// FoldAsciiReference is the per-byte loop it replaced, kept as the reference
// of the differential test (tests/core/normalize_test.cc). Both give the
// same bytes.
//
// Thread-safety: pure functions.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>

namespace prefsift::detail {

// REQUIRES (both): `text` is ASCII; `out` does not alias it. *out's buffer is
// reused.
void FoldAscii(std::string_view text, bool strip_punct, std::string* out);
void FoldAsciiReference(std::string_view text, bool strip_punct, std::string* out);

// Whether matching normalisation treats code point `cp` as white space,
// and as punctuation: the predicates of the general path.
bool IsSpaceCodepoint(int32_t cp);
bool IsPunctCodepoint(int32_t cp);

// The masks FoldAscii builds of 64 bytes at p (bit k: byte k): white space,
// and punctuation, of ASCII bytes. They must agree with the predicates above
// on every byte below 0x80 (tests/core/normalize_test.cc checks all 128).
uint64_t AsciiSpaceMask(const unsigned char* p);
uint64_t AsciiPunctMask(const unsigned char* p);

}  // namespace prefsift::detail
