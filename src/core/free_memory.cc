#include "core/free_memory.h"

#if defined(__GLIBC__)
#include <malloc.h>
#endif

namespace prefsift {

void ReturnFreeMemory() {
#if defined(__GLIBC__)
  malloc_trim(0);
#endif
}

}  // namespace prefsift
