// RFC 6901 JSON Pointers: parsing into reference tokens.
//
// "" is the whole document; "/a/0/b~1c" has tokens {"a","0","b/c"}.
// Thread-safe: pure functions.
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include "core/status.h"

namespace prefsift {

struct JsonPointer {
  std::string text;                 // as written
  std::vector<std::string> tokens;  // unescaped reference tokens
  bool empty() const { return tokens.empty(); }
};

// Parses `text` per RFC 6901 section 3-4: it must be empty or start with '/',
// and '~' must be followed by '0' or '1'. `what` names the field in errors.
Result<JsonPointer> ParseJsonPointer(std::string_view text, std::string_view what);

// True when `token` is an array index per RFC 6901 section 4 ("0" or a digit
// string without a leading zero). Sets *index.
bool ArrayIndexToken(std::string_view token, size_t* index);

}  // namespace prefsift
