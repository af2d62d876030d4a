// Gives the heap's free pages back to the operating system, so that memory a
// finished step freed lowers the process's resident size (and the next step's
// peak) instead of staying mapped. The pipeline calls it after each stage's
// decide step (docs/performance.md, "Memory"). With glibc this is
// malloc_trim(0), which also releases free pages inside the heap and the
// other threads' arenas; elsewhere it does nothing.
// Thread-safety: may be called from any thread; costs a few milliseconds.
#pragma once

namespace prefsift {

void ReturnFreeMemory();

// Whether ReturnFreeMemory does anything in this build (true with glibc).
bool ReturnsFreeMemory();

}  // namespace prefsift
