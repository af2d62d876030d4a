// This build and the run's time; see tool_info.h.
#include "report/tool_info.h"

#include <nlohmann/json.hpp>

#include <cmath>
#include <cstdlib>
#include <ctime>
#include <string>

#include "prefsift_version.h"

namespace prefsift {

using Json = nlohmann::ordered_json;

namespace {

std::string Utc(std::time_t t) {
  std::tm tm{};
  gmtime_r(&t, &tm);
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%SZ", &tm);
  return buf;
}

}  // namespace

Json ProvenanceTime(const RunClock& clock) {
  const char* sde = std::getenv("SOURCE_DATE_EPOCH");
  if (sde && *sde) {
    char* end = nullptr;
    long long v = std::strtoll(sde, &end, 10);
    if (end && *end == '\0' && v >= 0) {
      // The reproducible mode: a fixed time and no duration, so the same
      // inputs, plan and seed give byte-identical outputs.
      return Json{{"utc", Utc(static_cast<std::time_t>(v))},
                  {"source", "SOURCE_DATE_EPOCH (reproducible mode: no duration recorded)"}};
    }
  }
  std::time_t start = clock.start_unix_seconds >= 0 ? static_cast<std::time_t>(clock.start_unix_seconds)
                                                    : std::time(nullptr);
  Json t{{"utc", Utc(start)},
         {"source", "wall clock; set SOURCE_DATE_EPOCH for byte-identical reruns"}};
  if (clock.seconds >= 0) t["duration_seconds"] = std::round(clock.seconds * 1000) / 1000;
  return t;
}

Json ToolInfo() { return Json{{"name", "prefsift"}, {"version", PREFSIFT_VERSION}, {"revision", PREFSIFT_REVISION}}; }

}  // namespace prefsift
