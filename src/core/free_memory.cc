#include "core/free_memory.h"

// <cstdlib> brings in the C library's <features.h>, which defines __GLIBC__;
// without a C library header first, the test below is always false and
// ReturnFreeMemory does nothing.
#include <cstdlib>

#if defined(__GLIBC__)
#include <malloc.h>
#endif

namespace prefsift {

void ReturnFreeMemory() {
#if defined(__GLIBC__)
  malloc_trim(0);
#endif
}

bool ReturnsFreeMemory() {
#if defined(__GLIBC__)
  return true;
#else
  return false;
#endif
}

}  // namespace prefsift
