#include "core/json_parse.h"

#include <simdjson.h>

#include <cmath>
#include <cstdint>
#include <cstring>
#include <memory>
#include <string>
#include <utility>

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

// True when `text` may hold the number token "-0" (an integer token, no
// fraction or exponent): simdjson 3.0 stores it as int64 0, the same as "0",
// while nlohmann gives number_integer for "-0" and number_unsigned for "0".
// Errs towards true: a "-0" inside a string after ':', '[', ',' or
// whitespace also counts (the parse then merely declines).
bool MayHoldMinusZeroToken(std::string_view text) {
  for (size_t i = text.find("-0"); i != std::string_view::npos; i = text.find("-0", i + 1)) {
    if (i > 0) {
      const char b = text[i - 1];
      if (b != ':' && b != '[' && b != ',' && b != ' ' && b != '\t' && b != '\n' && b != '\r') continue;
    }
    if (i + 2 < text.size()) {
      const char a = text[i + 2];
      if (a == '.' || a == 'e' || a == 'E' || (a >= '0' && a <= '9')) continue;
    }
    return true;
  }
  return false;
}

// Builds *out from `e`; false to decline (see json_parse.h). `minus_zero`:
// MayHoldMinusZeroToken(text), so an integer 0 may stand for "-0".
bool Build(simdjson::dom::element e, bool minus_zero, Json* out) {
  using simdjson::dom::element_type;
  switch (e.type()) {
    case element_type::OBJECT: {
      simdjson::dom::object obj = e.get_object().value_unsafe();
      *out = Json::object();
      auto& members = out->get_ref<Json::object_t&>();
      members.reserve(obj.size());
      for (simdjson::dom::key_value_pair kv : obj) {
        // operator[]: a repeated key keeps its first place, gets its last
        // value (as nlohmann's json_sax_dom_parser::key).
        Json& slot = members[std::string(kv.key)];
        if (!Build(kv.value, minus_zero, &slot)) return false;
      }
      return true;
    }
    case element_type::ARRAY: {
      simdjson::dom::array arr = e.get_array().value_unsafe();
      *out = Json::array();
      auto& items = out->get_ref<Json::array_t&>();
      items.reserve(arr.size());
      for (simdjson::dom::element v : arr) {
        items.emplace_back();
        if (!Build(v, minus_zero, &items.back())) return false;
      }
      return true;
    }
    case element_type::STRING:
      *out = std::string(e.get_string().value_unsafe());
      return true;
    case element_type::INT64: {
      const int64_t v = e.get_int64().value_unsafe();
      if (v == 0 && minus_zero) return false;  // "0" or "-0"? decline
      if (v >= 0) {
        *out = static_cast<Json::number_unsigned_t>(v);
      } else {
        *out = static_cast<Json::number_integer_t>(v);
      }
      return true;
    }
    case element_type::UINT64:
      *out = static_cast<Json::number_unsigned_t>(e.get_uint64().value_unsafe());
      return true;
    case element_type::DOUBLE: {
      const double v = e.get_double().value_unsafe();
      // Only a token with fraction or exponent gets here ("-0.0" and
      // "-1e-400" give -0.0 in both); simdjson rejects overflow ("1e400"),
      // as nlohmann does (out_of_range 406), so this is a safety net.
      if (!std::isfinite(v)) return false;
      *out = static_cast<Json::number_float_t>(v);
      return true;
    }
    case element_type::BOOL:
      *out = e.get_bool().value_unsafe();
      return true;
    case element_type::NULL_VALUE:
      *out = nullptr;
      return true;
  }
  return false;
}

struct ThreadParser {
  simdjson::dom::parser parser;
  std::unique_ptr<char[]> buf;
  size_t cap = 0;
};

}  // namespace

bool ParseJsonFast(std::string_view text, Json* out) {
  thread_local ThreadParser tp;
  const size_t need = text.size() + simdjson::SIMDJSON_PADDING;
  if (tp.cap < need) {
    const size_t cap = need < 4096 ? 4096 : need + need / 2;
    tp.buf.reset(new char[cap]);
    tp.cap = cap;
  }
  std::memcpy(tp.buf.get(), text.data(), text.size());
  std::memset(tp.buf.get() + text.size(), 0, simdjson::SIMDJSON_PADDING);
  simdjson::dom::element root;
  if (tp.parser.parse(tp.buf.get(), text.size(), /*realloc_if_needed=*/false).get(root) != simdjson::SUCCESS) {
    return false;
  }
  return Build(root, MayHoldMinusZeroToken(text), out);
}

}  // namespace prefsift
