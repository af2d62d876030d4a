// Checks that confirm a pattern match really is what a rule says it is
// (checksums, reserved ranges, lengths, decodings). Pure functions of their
// input, no state: safe from any thread.
//
// The engine calls a validator by name (Rule::check) with the whole text
// and the span, so a validator may also look at the span's neighbours (e.g.
// to refuse "1.2.3.4" inside the version string "1.2.3.4.5").
#pragma once

#include <cstddef>
#include <string_view>

namespace prefsift::screen {

// REQUIRES: begin < *end <= text.size().
// A validator may shrink `*end` (never below begin+1) when the pattern took
// too much, e.g. an IBAN followed by a capitalised word.
using ValidatorFn = bool (*)(std::string_view text, size_t begin, size_t* end);

// nullptr if `name` is not a known check (rule key "check"; checks are
// named by their algorithm, e.g. "luhn", "iso7064-mod97-10", "verhoeff").
ValidatorFn FindValidator(std::string_view name);

// The current name of a check under its old, pre-rename name (e.g. "iban" ->
// "iso7064-mod97-10"), or nullptr. Only for error messages.
const char* RenamedCheck(std::string_view old_name);

// The checks themselves, on a bare value (separators allowed where noted).
bool LuhnValid(std::string_view digits);               // digits only; ISO/IEC 7812-1 Luhn
bool PaymentCardValid(std::string_view value);         // 13-19 digits, ' '/'-' allowed, issuer prefix, Luhn
bool IbanValid(std::string_view value);                // spaces allowed; length per country, MOD 97-10
bool UsSsnValid(std::string_view value);               // AAA-GG-SSSS / AAAGGSSSS
bool NlBsnValid(std::string_view value);               // 9 digits ('.', ' ' allowed), 11-test
bool EsDniValid(std::string_view value);               // DNI or NIE, '-' allowed, check letter
bool FrNirValid(std::string_view value);               // 15 chars, spaces allowed, key mod 97
bool InAadhaarValid(std::string_view value);           // 12 digits, ' '/'-' allowed, Verhoeff
bool VerhoeffValid(std::string_view digits);           // digits only
bool ItCodiceFiscaleValid(std::string_view value);     // 16 chars, check letter, birth date exists
bool Ipv4Valid(std::string_view value);                // dotted quad, no leading zeros
bool Ipv6Valid(std::string_view value);                // RFC 4291 2.2 text forms, no zone id
bool EmailValid(std::string_view value);               // lengths and dot/label rules (pattern does shape)
bool JwtValid(std::string_view value);                 // header is base64url JSON object with "alg"
double ShannonEntropyBitsPerChar(std::string_view s);  // over bytes

// Phone numbers. `value` as written (separators, parentheses allowed).
// E.164: '+' country code, then the national significant number (NSN), whose
// digit count must be in the country's table for known codes, else 8-15
// digits in all. National forms: trunk prefix handled per country.
bool PhoneE164Valid(std::string_view value);
bool PhoneNationalValid(std::string_view country, std::string_view value);  // "US","GB","DE","FR","IN","JP"

}  // namespace prefsift::screen
