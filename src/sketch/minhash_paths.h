// The code paths of sketch::Sign, for tests and benchmarks that compare them.
// Sign has a scalar path (any CPU, any number of slots) and, for up to 256
// slots, wide paths that resolve many empty bins at once with byte shuffles
// (AVX2: 32 bins, AVX-512 VBMI: 64). All give the same output. By default
// Sign runs the best path this CPU supports, chosen once.
// Thread-safety: ForceSignPath changes the path for every thread at once;
// call it only while no other thread signs (tests, benchmarks).
#pragma once

#include <cstdint>

namespace prefsift::sketch::detail {

enum class SignPath : uint8_t { kScalar, kAvx2, kAvx512 };

// Whether this CPU (and build) can run `path`.
bool SignPathAvailable(SignPath path);

// The path Sign runs now.
SignPath CurrentSignPath();

// Makes Sign run `path`. REQUIRES: SignPathAvailable(path).
void ForceSignPath(SignPath path);

// Back to the best available path.
void ResetSignPath();

}  // namespace prefsift::sketch::detail
