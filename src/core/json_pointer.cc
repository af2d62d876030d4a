#include "core/json_pointer.h"

namespace prefsift {

Result<JsonPointer> ParseJsonPointer(std::string_view text, std::string_view what) {
  JsonPointer p;
  p.text.assign(text);
  if (text.empty()) return p;
  if (text[0] != '/') {
    return Status::Usage("the JSON Pointer for '" + std::string(what) + "' is \"" + std::string(text) +
                         "\"; a JSON Pointer (RFC 6901) is empty or starts with '/'");
  }
  std::string token;
  for (size_t i = 1; i <= text.size(); ++i) {
    if (i == text.size() || text[i] == '/') {
      p.tokens.push_back(token);
      token.clear();
      continue;
    }
    char c = text[i];
    if (c == '~') {
      if (i + 1 < text.size() && text[i + 1] == '0') {
        token.push_back('~');
      } else if (i + 1 < text.size() && text[i + 1] == '1') {
        token.push_back('/');
      } else {
        return Status::Usage("the JSON Pointer for '" + std::string(what) + "' is \"" + std::string(text) +
                             "\"; '~' must be followed by 0 or 1 (RFC 6901 section 3)");
      }
      ++i;
    } else {
      token.push_back(c);
    }
  }
  return p;
}

bool ArrayIndexToken(std::string_view token, size_t* index) {
  if (token.empty() || token.size() > 18) return false;
  if (token.size() > 1 && token[0] == '0') return false;
  size_t v = 0;
  for (char c : token) {
    if (c < '0' || c > '9') return false;
    v = v * 10 + static_cast<size_t>(c - '0');
  }
  *index = v;
  return true;
}

}  // namespace prefsift
