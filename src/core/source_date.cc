#include "core/source_date.h"

#include <cstdlib>
#include <ctime>

namespace prefsift {

std::optional<int64_t> SourceDateEpoch() {
  const char* sde = std::getenv("SOURCE_DATE_EPOCH");
  if (sde == nullptr || *sde == '\0') return std::nullopt;
  char* end = nullptr;
  long long v = std::strtoll(sde, &end, 10);
  if (end == nullptr || *end != '\0' || end == sde || v < 0) return std::nullopt;
  return static_cast<int64_t>(v);
}

int64_t NowOrSourceDate() {
  if (auto sde = SourceDateEpoch()) return *sde;
  return static_cast<int64_t>(std::time(nullptr));
}

std::string UtcText(int64_t unix_seconds) {
  std::time_t t = static_cast<std::time_t>(unix_seconds);
  std::tm tm{};
  gmtime_r(&t, &tm);
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%SZ", &tm);
  return buf;
}

}  // namespace prefsift
