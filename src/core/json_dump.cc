#include "core/json_dump.h"

#include <simdjson.h>

#include <array>
#include <charconv>
#include <cmath>
#include <cstdint>
#include <cstring>

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

// What nlohmann's dump_escaped (serializer.hpp, 3.11.2) writes for a byte of
// valid UTF-8 when ensure_ascii is false: nothing special (0) for every byte
// but '"', '\\' and 0x00-0x1F; those become \b \t \n \f \r \" \\ or \u00xx
// (lowercase hex). 0x7F and all bytes >= 0x80 are copied as they are.
constexpr std::array<uint8_t, 256> kEscape = [] {
  std::array<uint8_t, 256> t{};
  for (int c = 0; c < 0x20; ++c) t[c] = 'u';
  t['\b'] = 'b';
  t['\t'] = 't';
  t['\n'] = 'n';
  t['\f'] = 'f';
  t['\r'] = 'r';
  t['"'] = '"';
  t['\\'] = '\\';
  return t;
}();

// True when one of the 8 bytes of `w` is < 0x20, '"' or '\\' (the classic
// "has zero byte" test, exact for whether any byte matches).
inline bool WordNeedsEscape(uint64_t w) {
  constexpr uint64_t kOnes = 0x0101010101010101ULL;
  constexpr uint64_t kHigh = 0x8080808080808080ULL;
  const uint64_t below_space = (w - kOnes * 0x20) & ~w;
  const uint64_t q = w ^ (kOnes * '"');
  const uint64_t b = w ^ (kOnes * '\\');
  const uint64_t quote = (q - kOnes) & ~q;
  const uint64_t backslash = (b - kOnes) & ~b;
  return ((below_space | quote | backslash) & kHigh) != 0;
}

// Appends the escaped body of `s`, already known to be valid UTF-8.
void AppendEscapedValid(std::string_view s, std::string* out) {
  const char* p = s.data();
  const char* const end = p + s.size();
  const char* run = p;  // start of the bytes not yet appended
  while (p < end) {
    // Skip 8 ordinary bytes at a time, then look at single bytes.
    while (end - p >= 8) {
      uint64_t w;
      std::memcpy(&w, p, 8);
      if (WordNeedsEscape(w)) break;
      p += 8;
    }
    while (p < end && kEscape[static_cast<uint8_t>(*p)] == 0) ++p;
    if (p == end) break;
    out->append(run, static_cast<size_t>(p - run));
    const uint8_t c = static_cast<uint8_t>(*p);
    const char e = static_cast<char>(kEscape[c]);
    if (e == 'u') {
      static constexpr char kHex[] = "0123456789abcdef";
      const char u[6] = {'\\', 'u', '0', '0', kHex[c >> 4], kHex[c & 0xF]};
      out->append(u, 6);
    } else {
      const char two[2] = {'\\', e};
      out->append(two, 2);
    }
    run = ++p;
  }
  out->append(run, static_cast<size_t>(end - run));
}

template <typename Int>
void AppendInteger(Int v, std::string* out) {
  char buf[24];
  const auto r = std::to_chars(buf, buf + sizeof buf, v);
  out->append(buf, static_cast<size_t>(r.ptr - buf));
}

void Append(const Json& j, std::string* out) {
  switch (j.type()) {
    case Json::value_t::null:
      out->append("null", 4);
      return;
    case Json::value_t::boolean:
      if (j.get_ref<const Json::boolean_t&>()) {
        out->append("true", 4);
      } else {
        out->append("false", 5);
      }
      return;
    case Json::value_t::number_integer:
      AppendInteger(j.get_ref<const Json::number_integer_t&>(), out);
      return;
    case Json::value_t::number_unsigned:
      AppendInteger(j.get_ref<const Json::number_unsigned_t&>(), out);
      return;
    case Json::value_t::number_float: {
      // nlohmann's dump_float: NaN and infinities as null, otherwise its own
      // Grisu2 shortest round-trip form (nlohmann::detail::to_chars, which
      // also appends ".0" to integral values).
      const double x = j.get_ref<const Json::number_float_t&>();
      if (!std::isfinite(x)) {
        out->append("null", 4);
        return;
      }
      std::array<char, 64> buf;
      char* end = nlohmann::detail::to_chars(buf.data(), buf.data() + buf.size(), x);
      out->append(buf.data(), static_cast<size_t>(end - buf.data()));
      return;
    }
    case Json::value_t::string:
      AppendJsonString(j.get_ref<const Json::string_t&>(), out);
      return;
    case Json::value_t::array: {
      out->push_back('[');
      bool first = true;
      for (const Json& v : j) {
        if (!first) out->push_back(',');
        first = false;
        Append(v, out);
      }
      out->push_back(']');
      return;
    }
    case Json::value_t::object: {
      out->push_back('{');
      bool first = true;
      for (auto it = j.begin(); it != j.end(); ++it) {
        if (!first) out->push_back(',');
        first = false;
        AppendJsonString(it.key(), out);
        out->push_back(':');
        Append(it.value(), out);
      }
      out->push_back('}');
      return;
    }
    case Json::value_t::binary:
    case Json::value_t::discarded:
    default:
      out->append(j.dump());  // rare, never from parsed text: nlohmann's own bytes
      return;
  }
}

}  // namespace

void AppendCompactJson(const nlohmann::ordered_json& j, std::string* out) { Append(j, out); }

void AppendJsonString(std::string_view s, std::string* out) {
  // nlohmann's decoder (Hoehrmann's DFA) accepts exactly the Unicode
  // standard's well-formed UTF-8 (no overlong forms, surrogates or code
  // points past U+10FFFF), as simdjson's validator does; the tests check it.
  if (!simdjson::validate_utf8(s.data(), s.size())) {
    out->append(Json(std::string(s)).dump());  // throws type_error 316 as that would
    return;
  }
  out->push_back('"');
  AppendEscapedValid(s, out);
  out->push_back('"');
}

}  // namespace prefsift
