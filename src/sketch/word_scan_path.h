// Which code segments ASCII text into words (sketch/shingles.cc), for tests
// and benchmarks only: every path gives the same words, and
// tests/sketch/shingles_test.cc runs each one this CPU has against the
// general UTF-8 loop (bench/sketch/text_steps times each). The pipeline never
// calls these; the widest path the CPU runs is chosen on first use.
//
// Thread-safety: SetWordScanPathForTesting changes the path of every thread;
// call it only while no other thread segments text.
#pragma once

#include <cstdint>
#include <vector>

namespace prefsift::sketch {

enum class WordScanPath : uint8_t {
  kGeneral,  // no ASCII path: the general UTF-8 loop for every text
  kScalar,   // 64-byte masks built a byte at a time (the path without SSE2)
  kSse2,     // masks 16 bytes a compare (the x86-64 baseline)
  kAvx2,     // 32 bytes a compare, chosen at run time
  kAvx512,   // AVX-512BW: 64 bytes a compare, chosen at run time
};

// The paths this build and CPU run, kGeneral first.
std::vector<WordScanPath> AvailableWordScanPaths();

// Makes `path` the one used (REQUIRES: one of AvailableWordScanPaths());
// returns the one used before.
WordScanPath SetWordScanPathForTesting(WordScanPath path);

const char* WordScanPathName(WordScanPath path);

}  // namespace prefsift::sketch
