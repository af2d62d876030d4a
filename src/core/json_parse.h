// A faster parse of one JSON text into an nlohmann::ordered_json, building
// exactly the tree nlohmann::ordered_json::parse(text) builds (nlohmann-json
// 3.11.2), or declining.
//
// Why: pass 2 parses every record a stage rewrites, and nlohmann's lexer
// reads a character at a time; simdjson's DOM parser (simdjson 3.x) is far
// faster. The tree is then built from simdjson's DOM with nlohmann's rules:
//  - object members in text order, a duplicate key keeping its first place
//    and taking its last value (nlohmann's DOM builder, json_sax.hpp, uses
//    ordered_map::operator[] per key);
//  - a number token without fraction or exponent is number_unsigned when it
//    is >= 0 and fits uint64, number_integer when negative and fits int64
//    (lexer.hpp, scan_number: strtoull / strtoll), else number_float;
//  - every other number is number_float, correctly rounded (both libraries).
// It declines (returns false; the caller then parses with nlohmann as
// before) on anything simdjson rejects (invalid JSON or UTF-8, lone
// surrogates, trailing content, depth beyond simdjson's default 1024,
// integers beyond 64 bits, a leading UTF-8 BOM, NUL bytes after the value;
// nlohmann accepts the last three) and on an integer 0 when the text may hold
// the token "-0" (simdjson 3.0 reads "-0" and "0" alike; nlohmann gives
// number_integer and number_unsigned).
// Thread-safe: one simdjson parser per thread.
#pragma once

#include <string_view>

#include <nlohmann/json.hpp>

namespace prefsift {

// Parses `text` into *out and returns true, or returns false (*out then holds
// an unspecified value) when it declines.
bool ParseJsonFast(std::string_view text, nlohmann::ordered_json* out);

}  // namespace prefsift
