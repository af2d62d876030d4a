#include "core/peak_rss.h"

#include <sys/resource.h>

namespace prefsift {

uint64_t PeakResidentBytes() {
  rusage u{};
  if (getrusage(RUSAGE_SELF, &u) != 0 || u.ru_maxrss < 0) return 0;
#if defined(__APPLE__)
  return static_cast<uint64_t>(u.ru_maxrss);  // bytes there
#else
  return static_cast<uint64_t>(u.ru_maxrss) * 1024;  // KiB on Linux and the BSDs
#endif
}

}  // namespace prefsift
