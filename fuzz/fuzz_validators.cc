// Fuzz target: every validator of screen/validators.h on arbitrary bytes,
// both as bare values and through FindValidator() on a span of a text.
// Property: no crash, no out-of-bounds read, and a validator that shrinks
// the span keeps begin < end <= the old end.
#include <cstdint>
#include <cstdlib>
#include <string_view>

#include "screen/validators.h"

namespace {
// Every name in validators.cc's table (a missing one aborts, so this list cannot go stale silently).
const char* kNames[] = {"rfc5321-mailbox", "luhn", "iso7064-mod97-10", "ssa-never-issued-ranges", "eleven-test",
                        "mod23-letter", "mod97-complement-key", "verhoeff", "odd-even-mod26-letter",
                        "dotted-quad-octets", "rfc4291-text-form", "eui48-text-form", "base64url-json-header",
                        "shannon-entropy", "e164-national-length", "nanp-leading-digits", "british-trunk-0-length",
                        "german-trunk-0-length", "french-trunk-0-length", "indian-mobile-length",
                        "japanese-trunk-0-length"};
}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  namespace s = prefsift::screen;
  if (size < 2) return 0;
  size_t a = data[0], b = data[1];
  std::string_view text(reinterpret_cast<const char*>(data + 2), size - 2);
  s::LuhnValid(text);
  s::PaymentCardValid(text);
  s::IbanValid(text);
  s::UsSsnValid(text);
  s::NlBsnValid(text);
  s::EsDniValid(text);
  s::FrNirValid(text);
  s::InAadhaarValid(text);
  s::VerhoeffValid(text);
  s::ItCodiceFiscaleValid(text);
  s::Ipv4Valid(text);
  s::Ipv6Valid(text);
  s::EmailValid(text);
  s::JwtValid(text);
  s::ShannonEntropyBitsPerChar(text);
  s::PhoneE164Valid(text);
  for (const char* c : {"US", "GB", "DE", "FR", "IN", "JP", "XX", ""}) s::PhoneNationalValid(c, text);
  if (text.empty()) return 0;
  size_t begin = a % text.size();
  size_t end = begin + 1 + b % (text.size() - begin);
  for (const char* name : kNames) {
    s::ValidatorFn fn = s::FindValidator(name);
    if (!fn) std::abort();
    size_t e = end;
    fn(text, begin, &e);
    if (e <= begin || e > end) std::abort();
  }
  return 0;
}
