// Compact JSON text of an nlohmann::ordered_json, byte for byte what
// nlohmann's own j.dump() gives (indent -1, ensure_ascii false, strict errors).
//
// Why: pass 2 re-serialises every record a stage rewrites, and nlohmann's
// serializer writes escaped strings a character at a time; this one copies
// runs of ordinary bytes in bulk and appends straight to the caller's string.
// Anything it cannot reproduce exactly itself (strings that are not valid
// UTF-8, binary values, discarded values) it hands to nlohmann for that
// value, so invalid UTF-8 throws the same type_error 316 as j.dump().
// Thread-safe: pure functions.
#pragma once

#include <string>
#include <string_view>

#include <nlohmann/json.hpp>

namespace prefsift {

// Appends the bytes of j.dump() to *out. If it throws (invalid UTF-8 in a
// string), *out holds an unspecified prefix of the text.
void AppendCompactJson(const nlohmann::ordered_json& j, std::string* out);

// Appends the bytes of nlohmann::ordered_json(std::string(s)).dump(): `s` as
// a quoted, escaped JSON string. Throws as that would on invalid UTF-8.
void AppendJsonString(std::string_view s, std::string* out);

}  // namespace prefsift
