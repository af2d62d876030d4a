// The process's peak resident memory so far (the high-water mark the kernel
// keeps), for --timings: the phase in which it last grew is the phase that
// sets the run's peak (docs/performance.md, "Memory").
// Thread-safety: may be called from any thread.
#pragma once

#include <cstdint>

namespace prefsift {

// Bytes; 0 where the system does not say.
uint64_t PeakResidentBytes();

}  // namespace prefsift
