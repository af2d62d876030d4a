// Safe lookup of a nested key path in a JSON summary: nullptr when any key on
// the path is missing (never inserts, never throws). Thread-safe.
#pragma once

#include <nlohmann/json.hpp>

#include <initializer_list>

namespace prefsift {

inline const nlohmann::ordered_json* FindPath(const nlohmann::ordered_json& j,
                                              std::initializer_list<const char*> path) {
  const nlohmann::ordered_json* cur = &j;
  for (const char* k : path) {
    if (!cur->is_object() || !cur->contains(k)) return nullptr;
    cur = &(*cur)[k];
  }
  return cur;
}

}  // namespace prefsift
