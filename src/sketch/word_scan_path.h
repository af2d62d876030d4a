// The code paths that segment ASCII text into words (sketch/shingles.cc), for
// tests and benchmarks that compare them. ASCII text is scanned by 64-byte bit
// masks of its bytes' word classes, built a byte at a time (any CPU), by SSE2
// (the x86-64 baseline) or by AVX2 or AVX-512BW (chosen at run time); other
// text, and the rest of a text from its first byte >= 0x80, by the general
// UTF-8 loop. All give the same words; tests/sketch/shingles_test.cc runs each
// path this CPU has against the general loop, bench/sketch/text_steps times
// each. By default the widest path this CPU runs is used, chosen once.
// Thread-safety: ForceWordScanPath and ResetWordScanPath change the path for
// every thread at once; call them only while no other thread segments text
// (tests, benchmarks).
#pragma once

#include <cstdint>
#include <vector>

namespace prefsift::sketch::detail {

enum class WordScanPath : uint8_t {
  kGeneral,  // no mask path: the general UTF-8 loop for every text
  kScalar,   // masks built a byte at a time (the path of builds without SSE2)
  kSse2,     // 16 bytes a compare
  kAvx2,     // 32 bytes a compare
  kAvx512,   // AVX-512BW: 64 bytes a compare
};

// The paths this build and CPU run, kGeneral first.
std::vector<WordScanPath> AvailableWordScanPaths();

// Makes word segmentation run `path`. REQUIRES: one of AvailableWordScanPaths().
void ForceWordScanPath(WordScanPath path);

// Back to the widest available path.
void ResetWordScanPath();

const char* WordScanPathName(WordScanPath path);

}  // namespace prefsift::sketch::detail
