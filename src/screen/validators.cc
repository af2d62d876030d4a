// Validators of the personal-data screen. See validators.h. Stateless.
#include "screen/validators.h"

#include <array>
#include <cmath>
#include <cstdint>
#include <string>

#include <nlohmann/json.hpp>

namespace prefsift::screen {
namespace {

bool IsDigit(char c) { return c >= '0' && c <= '9'; }
bool IsUpper(char c) { return c >= 'A' && c <= 'Z'; }
bool IsLower(char c) { return c >= 'a' && c <= 'z'; }
bool IsAlpha(char c) { return IsUpper(c) || IsLower(c); }
bool IsAlnum(char c) { return IsDigit(c) || IsAlpha(c); }
bool IsHex(char c) { return IsDigit(c) || (c >= 'a' && c <= 'f') || (c >= 'A' && c <= 'F'); }
bool IsWordByte(char c) { return IsAlnum(c) || c == '_'; }

// Keeps digits; returns false if any other byte is not in `allowed`.
bool DigitsOnly(std::string_view v, std::string_view allowed, std::string* out) {
  out->clear();
  for (char c : v) {
    if (IsDigit(c)) {
      out->push_back(c);
    } else if (allowed.find(c) == std::string_view::npos) {
      return false;
    }
  }
  return true;
}

// ---- IBAN country lengths (SWIFT IBAN registry; from memory, checked
// against python3-stdnum's registry by tests/screen/iban_reference_test). ----
struct IbanLen { char cc[3]; int len; };
constexpr IbanLen kIbanLengths[] = {
    {"AD", 24}, {"AE", 23}, {"AL", 28}, {"AT", 20}, {"AZ", 28}, {"BA", 20}, {"BE", 16},
    {"BG", 22}, {"BH", 22}, {"BI", 27}, {"BR", 29}, {"BY", 28}, {"CH", 21}, {"CR", 22},
    {"CY", 28}, {"CZ", 24}, {"DE", 22}, {"DJ", 27}, {"DK", 18}, {"DO", 28}, {"EE", 20},
    {"EG", 29}, {"ES", 24}, {"FI", 18}, {"FK", 18}, {"FO", 18}, {"FR", 27}, {"GB", 22},
    {"GE", 22}, {"GI", 23}, {"GL", 18}, {"GR", 27}, {"GT", 28}, {"HR", 21}, {"HU", 28},
    {"IE", 22}, {"IL", 23}, {"IQ", 23}, {"IS", 26}, {"IT", 27}, {"JO", 30}, {"KW", 30},
    {"KZ", 20}, {"LB", 28}, {"LC", 32}, {"LI", 21}, {"LT", 20}, {"LU", 20}, {"LV", 21},
    {"LY", 25}, {"MC", 27}, {"MD", 24}, {"ME", 22}, {"MK", 19}, {"MN", 20}, {"MR", 27},
    {"MT", 31}, {"MU", 30}, {"NI", 28}, {"NL", 18}, {"NO", 15}, {"OM", 23}, {"PK", 24},
    {"PL", 28}, {"PS", 29}, {"PT", 25}, {"QA", 29}, {"RO", 24}, {"RS", 22}, {"RU", 33},
    {"SA", 24}, {"SC", 31}, {"SD", 18}, {"SE", 24}, {"SI", 19}, {"SK", 24}, {"SM", 27},
    {"SO", 23}, {"ST", 25}, {"SV", 28}, {"TL", 23}, {"TN", 24}, {"TR", 26}, {"UA", 29},
    {"VA", 22}, {"VG", 24}, {"XK", 20}, {"YE", 30},
};

int IbanLength(char a, char b) {
  for (const auto& e : kIbanLengths) {
    if (e.cc[0] == a && e.cc[1] == b) return e.len;
  }
  return 0;
}

// ---- Phone number length tables: national significant number lengths.
// Aligned with the "possible lengths" of python3-phonenumbers' metadata
// (general description, local-only lengths excluded); see docs. ----
struct PhoneCountry {
  const char* region;
  const char* cc;
  uint32_t lengths;  // bit n set: NSN of n digits is possible
};
constexpr uint32_t Bits(int lo, int hi) {
  uint32_t m = 0;
  for (int i = lo; i <= hi; ++i) m |= (1u << i);
  return m;
}
constexpr PhoneCountry kPhoneCountries[] = {
    {"US", "1", Bits(10, 10)},
    {"GB", "44", (1u << 7) | Bits(9, 10)},
    {"DE", "49", Bits(4, 15)},
    {"FR", "33", Bits(9, 9)},
    {"IN", "91", Bits(8, 13)},
    {"JP", "81", Bits(8, 17)},
};

const PhoneCountry* PhoneByRegion(std::string_view r) {
  if (r == "CA") r = "US";
  for (const auto& c : kPhoneCountries) {
    if (r == c.region) return &c;
  }
  return nullptr;
}

bool NsnLengthOk(const PhoneCountry& c, size_t n) {
  return n < 32 && (c.lengths & (1u << n)) != 0;
}

// ---- Verhoeff tables (Verhoeff 1969; dihedral group D5). ----
constexpr uint8_t kVd[10][10] = {
    {0, 1, 2, 3, 4, 5, 6, 7, 8, 9}, {1, 2, 3, 4, 0, 6, 7, 8, 9, 5},
    {2, 3, 4, 0, 1, 7, 8, 9, 5, 6}, {3, 4, 0, 1, 2, 8, 9, 5, 6, 7},
    {4, 0, 1, 2, 3, 9, 5, 6, 7, 8}, {5, 9, 8, 7, 6, 0, 4, 3, 2, 1},
    {6, 5, 9, 8, 7, 1, 0, 4, 3, 2}, {7, 6, 5, 9, 8, 2, 1, 0, 4, 3},
    {8, 7, 6, 5, 9, 3, 2, 1, 0, 4}, {9, 8, 7, 6, 5, 4, 3, 2, 1, 0}};
constexpr uint8_t kVp[8][10] = {
    {0, 1, 2, 3, 4, 5, 6, 7, 8, 9}, {1, 5, 7, 6, 2, 8, 3, 0, 9, 4},
    {5, 8, 0, 3, 7, 9, 6, 1, 4, 2}, {8, 9, 1, 6, 0, 4, 3, 5, 2, 7},
    {9, 4, 5, 3, 1, 2, 6, 8, 7, 0}, {4, 2, 8, 6, 5, 7, 3, 9, 0, 1},
    {2, 7, 9, 3, 8, 0, 6, 4, 1, 5}, {7, 0, 4, 6, 9, 1, 3, 2, 5, 8}};

// Base64url (RFC 4648 section 5) without padding; false on a bad byte.
bool Base64UrlDecode(std::string_view in, std::string* out) {
  out->clear();
  uint32_t acc = 0;
  int bits = 0;
  for (char c : in) {
    int v;
    if (IsUpper(c)) v = c - 'A';
    else if (IsLower(c)) v = c - 'a' + 26;
    else if (IsDigit(c)) v = c - '0' + 52;
    else if (c == '-') v = 62;
    else if (c == '_') v = 63;
    else if (c == '=') break;
    else return false;
    acc = (acc << 6) | static_cast<uint32_t>(v);
    bits += 6;
    if (bits >= 8) {
      bits -= 8;
      out->push_back(static_cast<char>((acc >> bits) & 0xFF));
    }
  }
  return true;
}

// ---- Wrappers with text context. ----
std::string_view Span(std::string_view t, size_t b, size_t e) { return t.substr(b, e - b); }

// Is [b, e) part of a checksum-valid IBAN that starts at most 40 bytes
// earlier? Digit rules (card, Aadhaar, BSN) refuse such spans: the IBAN rule
// reports the whole account number instead of a fragment that a national-number rule would also accept.
bool InsideValidIban(std::string_view t, size_t b, size_t e) {
  size_t lo = b > 40 ? b - 40 : 0;
  for (size_t p = b; p-- > lo;) {
    char c = t[p];
    if (!(IsUpper(c) || IsDigit(c) || c == ' ')) break;
    if (p + 4 > t.size() || !IsUpper(t[p]) || !IsUpper(t[p + 1]) || !IsDigit(t[p + 2]) || !IsDigit(t[p + 3])) {
      continue;
    }
    if (p > 0 && IsAlnum(t[p - 1])) continue;
    int want = IbanLength(t[p], t[p + 1]);
    if (want == 0) continue;
    int n = 0;
    size_t i = p;
    for (; i < t.size() && n < want; ++i) {
      if (IsAlnum(t[i])) ++n;
      else if (t[i] != ' ') break;
    }
    if (n == want && i >= e && IbanValid(Span(t, p, i))) return true;
  }
  return false;
}

bool VEmail(std::string_view t, size_t b, size_t* e) { return EmailValid(Span(t, b, *e)); }
bool VCard(std::string_view t, size_t b, size_t* e) {
  return PaymentCardValid(Span(t, b, *e)) && !InsideValidIban(t, b, *e);
}

bool VIban(std::string_view t, size_t b, size_t* e) {
  // Walk to the country's length; drop anything the pattern took after it.
  if (*e - b < 4) return false;
  int want = IbanLength(t[b], t[b + 1]);
  if (want == 0) return false;
  int n = 0;
  size_t i = b;
  for (; i < *e && n < want; ++i) {
    if (IsAlnum(t[i])) ++n;
  }
  if (n < want) return false;
  if (i < t.size() && IsAlnum(t[i])) return false;  // glued to more letters/digits
  if (!IbanValid(Span(t, b, i))) return false;
  *e = i;
  return true;
}

bool VSsn(std::string_view t, size_t b, size_t* e) {
  std::string_view v = Span(t, b, *e);
  if (v.size() == 11 && v[3] != v[6]) return false;  // one separator style
  return UsSsnValid(v);
}
bool VBsn(std::string_view t, size_t b, size_t* e) {
  return NlBsnValid(Span(t, b, *e)) && !InsideValidIban(t, b, *e);
}
bool VDni(std::string_view t, size_t b, size_t* e) { return EsDniValid(Span(t, b, *e)); }
bool VNir(std::string_view t, size_t b, size_t* e) { return FrNirValid(Span(t, b, *e)); }
bool VAadhaar(std::string_view t, size_t b, size_t* e) {
  return InAadhaarValid(Span(t, b, *e)) && !InsideValidIban(t, b, *e);
}
bool VCodiceFiscale(std::string_view t, size_t b, size_t* e) { return ItCodiceFiscaleValid(Span(t, b, *e)); }

// IPv4 inside a longer dotted number ("1.2.3.4.5", "v1.2.3.4") is not an address.
bool VIpv4(std::string_view t, size_t b, size_t* e) {
  if (b >= 2 && t[b - 1] == '.' && IsAlnum(t[b - 2])) return false;
  if (b >= 1 && (IsAlpha(t[b - 1]) || t[b - 1] == '_')) return false;
  if (*e + 1 < t.size() && t[*e] == '.' && IsAlnum(t[*e + 1])) return false;
  return Ipv4Valid(Span(t, b, *e));
}

bool VIpv6(std::string_view t, size_t b, size_t* e) {
  if (b >= 1 && (IsWordByte(t[b - 1]) || t[b - 1] == ':' || t[b - 1] == '.')) return false;
  if (*e < t.size() && (IsWordByte(t[*e]) || t[*e] == ':')) return false;
  if (*e + 1 < t.size() && t[*e] == '.' && IsAlnum(t[*e + 1])) return false;
  std::string_view v = Span(t, b, *e);
  int hex = 0;
  for (char c : v) hex += IsHex(c) ? 1 : 0;
  if (hex < 2) return false;  // "::", "a::" and the like are code, not addresses
  return Ipv6Valid(v);
}

bool VMac(std::string_view t, size_t b, size_t* e) {
  std::string_view v = Span(t, b, *e);
  if (v.size() == 17) {
    char sep = v[2];
    for (size_t i = 2; i < 17; i += 3) {
      if (v[i] != sep) return false;
    }
    return true;
  }
  return v.size() == 14;  // dotted form; the pattern checked the hex digits
}

bool VJwt(std::string_view t, size_t b, size_t* e) { return JwtValid(Span(t, b, *e)); }

bool VEntropy(std::string_view t, size_t b, size_t* e) {
  std::string_view v = Span(t, b, *e);
  bool letter = false, digit = false;
  for (char c : v) {
    letter |= IsAlpha(c);
    digit |= IsDigit(c);
  }
  return letter && digit && ShannonEntropyBitsPerChar(v) >= 4.2;
}

// E.164: try the longest run of digit groups first, then shorter ones, since
// the pattern may have taken a following number too.
bool VPhoneE164(std::string_view t, size_t b, size_t* e) {
  for (size_t end = *e; end > b + 1; --end) {
    if (!IsDigit(t[end - 1])) continue;
    if (end < *e && IsDigit(t[end])) continue;  // only at group ends
    if (PhoneE164Valid(Span(t, b, end))) {
      *e = end;
      return true;
    }
  }
  return false;
}

template <const char* kRegion>
bool VPhoneNational(std::string_view t, size_t b, size_t* e) {
  return PhoneNationalValid(kRegion, Span(t, b, *e));
}
constexpr char kUS[] = "US";
constexpr char kGB[] = "GB";
constexpr char kDE[] = "DE";
constexpr char kFR[] = "FR";
constexpr char kIN[] = "IN";
constexpr char kJP[] = "JP";

// Checks are named by their algorithm (docs/personal-data.md, "Checks").
struct NamedValidator { std::string_view name; ValidatorFn fn; std::string_view old_name; };
constexpr NamedValidator kValidators[] = {
    {"rfc5321-mailbox", VEmail, "email"},
    {"luhn", VCard, "payment_card"},
    {"iso7064-mod97-10", VIban, "iban"},
    {"ssa-never-issued-ranges", VSsn, "us_ssn"},
    {"eleven-test", VBsn, "nl_bsn"},
    {"mod23-letter", VDni, "es_dni"},
    {"mod97-complement-key", VNir, "fr_nir"},
    {"verhoeff", VAadhaar, "in_aadhaar"},
    {"odd-even-mod26-letter", VCodiceFiscale, "it_codice_fiscale"},
    {"dotted-quad-octets", VIpv4, "ipv4"},
    {"rfc4291-text-form", VIpv6, "ipv6"},
    {"eui48-text-form", VMac, "mac"},
    {"base64url-json-header", VJwt, "jwt"},
    {"shannon-entropy", VEntropy, "high_entropy"},
    {"e164-national-length", VPhoneE164, "phone_e164"},
    {"nanp-leading-digits", VPhoneNational<kUS>, "phone_nanp"},
    {"british-trunk-0-length", VPhoneNational<kGB>, "phone_gb"},
    {"german-trunk-0-length", VPhoneNational<kDE>, "phone_de"},
    {"french-trunk-0-length", VPhoneNational<kFR>, "phone_fr"},
    {"indian-mobile-length", VPhoneNational<kIN>, "phone_in"},
    {"japanese-trunk-0-length", VPhoneNational<kJP>, "phone_jp"},
};

}  // namespace

ValidatorFn FindValidator(std::string_view name) {
  for (const auto& v : kValidators) {
    if (v.name == name) return v.fn;
  }
  return nullptr;
}

const char* RenamedCheck(std::string_view old_name) {
  for (const auto& v : kValidators) {
    if (v.old_name == old_name) return v.name.data();
  }
  return nullptr;
}

bool LuhnValid(std::string_view digits) {
  if (digits.empty()) return false;
  int sum = 0;
  bool dbl = false;
  for (size_t i = digits.size(); i-- > 0;) {
    char c = digits[i];
    if (!IsDigit(c)) return false;
    int d = c - '0';
    if (dbl) {
      d *= 2;
      if (d > 9) d -= 9;
    }
    sum += d;
    dbl = !dbl;
  }
  return sum % 10 == 0;
}

bool PaymentCardValid(std::string_view value) {
  std::string d;
  if (!DigitsOnly(value, " -", &d)) return false;
  if (d.size() < 13 || d.size() > 19) return false;
  bool all_same = true;
  for (char c : d) all_same &= (c == d[0]);
  if (all_same) return false;
  int p2 = (d[0] - '0') * 10 + (d[1] - '0');
  int p3 = p2 * 10 + (d[2] - '0');
  int p4 = p3 * 10 + (d[3] - '0');
  bool known = false;
  switch (d[0]) {
    case '2': known = p4 >= 2221 && p4 <= 2720; break;                    // Mastercard 2-series
    case '3': known = p2 == 34 || p2 == 37 || p2 == 36 || p2 == 38 || p2 == 39 ||
                      (p3 >= 300 && p3 <= 305) || (p4 >= 3528 && p4 <= 3589); break;
    case '4': known = true; break;                                        // Visa
    case '5': known = p2 >= 50 && p2 <= 58; break;                        // Mastercard, Maestro
    case '6': known = true; break;                                        // Discover, UnionPay, Maestro
    default: known = false;
  }
  return known && LuhnValid(d);
}

bool IbanValid(std::string_view value) {
  std::string s;
  for (char c : value) {
    if (c == ' ') continue;
    if (!IsAlnum(c)) return false;
    s.push_back(IsLower(c) ? static_cast<char>(c - 'a' + 'A') : c);
  }
  if (s.size() < 5 || !IsUpper(s[0]) || !IsUpper(s[1]) || !IsDigit(s[2]) || !IsDigit(s[3])) {
    return false;
  }
  int want = IbanLength(s[0], s[1]);
  if (want == 0 || static_cast<int>(s.size()) != want) return false;
  // ISO/IEC 7064 MOD 97-10: move the first four to the end, letters -> 10..35.
  std::string r = s.substr(4) + s.substr(0, 4);
  int mod = 0;
  for (char c : r) {
    if (IsDigit(c)) {
      mod = (mod * 10 + (c - '0')) % 97;
    } else {
      mod = (mod * 100 + (c - 'A' + 10)) % 97;
    }
  }
  return mod == 1;
}

bool UsSsnValid(std::string_view value) {
  std::string d;
  if (!DigitsOnly(value, "- ", &d) || d.size() != 9) return false;
  std::string_view a(d.data(), 3), g(d.data() + 3, 2), s(d.data() + 5, 4);
  // SSA "SSN Randomization FAQ": area 000, 666, 900-999; group 00; serial 0000.
  if (a == "000" || a == "666" || a[0] == '9' || g == "00" || s == "0000") return false;
  // Numbers printed in advertising and widely misused (the list python3-stdnum
  // keeps; from memory: a 1938 wallet insert and later advertisements).
  if (d == "078051120" || d == "457555462" || d == "219099999") return false;
  return true;
}

bool NlBsnValid(std::string_view value) {
  std::string d;
  if (!DigitsOnly(value, ". ", &d) || d.size() != 9) return false;
  if (d == "000000000") return false;
  int sum = 0;
  for (int i = 0; i < 8; ++i) sum += (9 - i) * (d[i] - '0');
  sum -= d[8] - '0';
  return ((sum % 11) + 11) % 11 == 0;
}

bool EsDniValid(std::string_view value) {
  std::string s;
  for (char c : value) {
    if (c == '-' || c == ' ') continue;
    s.push_back(IsLower(c) ? static_cast<char>(c - 'a' + 'A') : c);
  }
  if (s.size() != 9) return false;
  std::string num = s.substr(0, 8);
  if (num[0] == 'X') num[0] = '0';
  else if (num[0] == 'Y') num[0] = '1';
  else if (num[0] == 'Z') num[0] = '2';
  long n = 0;
  for (char c : num) {
    if (!IsDigit(c)) return false;
    n = n * 10 + (c - '0');
  }
  static constexpr char kLetters[] = "TRWAGMYFPDXBNJZSQVHLCKE";
  return s[8] == kLetters[n % 23];
}

bool FrNirValid(std::string_view value) {
  std::string s;
  for (char c : value) {
    if (c == ' ' || c == '.') continue;
    s.push_back(IsLower(c) ? static_cast<char>(c - 'a' + 'A') : c);
  }
  if (s.size() != 15) return false;
  std::string dept = s.substr(5, 2);
  if (dept == "2A") s.replace(5, 2, "19");
  else if (dept == "2B") s.replace(5, 2, "18");
  for (char c : s) {
    if (!IsDigit(c)) return false;
  }
  long long n = 0;
  for (int i = 0; i < 13; ++i) n = n * 10 + (s[i] - '0');
  int key = (s[13] - '0') * 10 + (s[14] - '0');
  return 97 - static_cast<int>(n % 97) == key;
}

bool VerhoeffValid(std::string_view digits) {
  if (digits.empty()) return false;
  int c = 0;
  size_t i = 0;
  for (size_t k = digits.size(); k-- > 0; ++i) {
    if (!IsDigit(digits[k])) return false;
    c = kVd[c][kVp[i % 8][digits[k] - '0']];
  }
  return c == 0;
}

bool InAadhaarValid(std::string_view value) {
  std::string d;
  if (!DigitsOnly(value, " -", &d) || d.size() != 12) return false;
  if (d[0] == '0' || d[0] == '1') return false;
  if (std::string(d.rbegin(), d.rend()) == d) return false;  // never a palindrome
  return VerhoeffValid(d);
}

// Italian codice fiscale (personal, 16 characters; DM 23/12/1976 layout, from
// memory): 6 letters, year (2), month letter, day (+40 for women), place
// (letter + 3), check letter. Digits of year/day/place may be replaced by
// L M N P Q R S T U V (omocodia). Check letter: odd positions (1st, 3rd, ...)
// use the table below, even positions their value, sum mod 26.
bool ItCodiceFiscaleValid(std::string_view value) {
  std::string s;
  for (char c : value) {
    if (c == ' ' || c == '-') continue;
    s.push_back(IsLower(c) ? static_cast<char>(c - 'a' + 'A') : c);
  }
  if (s.size() != 16) return false;
  static constexpr std::string_view kOmo = "LMNPQRSTUV";
  static constexpr std::string_view kMonths = "ABCDEHLMPRST";
  auto digit = [](char c) -> int {
    if (IsDigit(c)) return c - '0';
    size_t k = kOmo.find(c);
    return k == std::string_view::npos ? -1 : static_cast<int>(k);
  };
  for (int i = 0; i < 6; ++i) {
    if (!IsUpper(s[static_cast<size_t>(i)])) return false;
  }
  for (int i : {6, 7, 9, 10, 12, 13, 14}) {
    if (digit(s[static_cast<size_t>(i)]) < 0) return false;
  }
  if (!IsUpper(s[11]) || !IsUpper(s[15]) || kMonths.find(s[8]) == std::string_view::npos) return false;
  static constexpr int kOdd[26] = {1, 0, 5, 7, 9, 13, 15, 17, 19, 21, 2, 4, 18,
                                   20, 11, 3, 6, 8, 12, 14, 16, 10, 22, 25, 24, 23};
  int sum = 0;
  for (size_t i = 0; i < 15; ++i) {
    char c = s[i];
    int v = IsDigit(c) ? c - '0' : c - 'A';
    sum += (i % 2 == 0) ? kOdd[v] : v;
  }
  if (s[15] != static_cast<char>('A' + sum % 26)) return false;
  // Birth date must exist (years read as 1920-2019, as python3-stdnum does).
  int year = 1900 + digit(s[6]) * 10 + digit(s[7]);
  if (year < 1920) year += 100;
  int month = static_cast<int>(kMonths.find(s[8])) + 1;
  int day = (digit(s[9]) * 10 + digit(s[10])) % 40;
  static constexpr int kDays[12] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
  int max_day = kDays[month - 1];
  if (month == 2 && ((year % 4 == 0 && year % 100 != 0) || year % 400 == 0)) max_day = 29;
  return day >= 1 && day <= max_day;
}

bool Ipv4Valid(std::string_view v) {
  int parts = 0;
  size_t i = 0;
  while (true) {
    size_t start = i;
    int val = 0;
    while (i < v.size() && IsDigit(v[i]) && i - start < 4) val = val * 10 + (v[i++] - '0');
    size_t len = i - start;
    if (len == 0 || len > 3 || val > 255 || (len > 1 && v[start] == '0')) return false;
    ++parts;
    if (i == v.size()) break;
    if (v[i] != '.' || parts == 4) return false;
    ++i;
  }
  return parts == 4;
}

bool Ipv6Valid(std::string_view v) {
  if (v.empty() || v.size() > 45) return false;
  size_t dc = v.find("::");
  if (dc != std::string_view::npos && v.find("::", dc + 1) != std::string_view::npos) return false;
  // Count groups on each side of "::" (or in the whole string).
  auto count_groups = [](std::string_view part, bool allow_v4_tail, int* groups) -> bool {
    *groups = 0;
    if (part.empty()) return true;
    size_t i = 0;
    while (true) {
      size_t j = part.find(':', i);
      std::string_view g = part.substr(i, j == std::string_view::npos ? std::string_view::npos : j - i);
      if (j == std::string_view::npos && allow_v4_tail && g.find('.') != std::string_view::npos) {
        if (!Ipv4Valid(g)) return false;
        *groups += 2;
        return true;
      }
      if (g.empty() || g.size() > 4) return false;
      for (char c : g) {
        if (!IsHex(c)) return false;
      }
      ++*groups;
      if (j == std::string_view::npos) return true;
      i = j + 1;
    }
  };
  int left = 0, right = 0;
  if (dc == std::string_view::npos) {
    return count_groups(v, true, &left) && left == 8;
  }
  std::string_view l = v.substr(0, dc), r = v.substr(dc + 2);
  if (!count_groups(l, false, &left) || !count_groups(r, true, &right)) return false;
  return left + right <= 7;
}

bool EmailValid(std::string_view v) {
  // RFC 5321 4.5.3.1.1: local part <= 64 octets; RFC 3696 erratum 1690:
  // whole address <= 254.
  if (v.size() > 254) return false;
  size_t at = v.rfind('@');
  if (at == std::string_view::npos || at == 0 || at > 64) return false;
  std::string_view local = v.substr(0, at), domain = v.substr(at + 1);
  if (local.front() == '.' || local.back() == '.' || local.find("..") != std::string_view::npos) {
    return false;
  }
  if (domain.empty() || domain.size() > 253) return false;
  size_t start = 0;
  while (start <= domain.size()) {
    size_t dot = domain.find('.', start);
    size_t end = dot == std::string_view::npos ? domain.size() : dot;
    std::string_view label = domain.substr(start, end - start);
    if (label.empty() || label.size() > 63 || label.front() == '-' || label.back() == '-') {
      return false;
    }
    if (dot == std::string_view::npos) break;
    start = dot + 1;
  }
  return true;
}

bool JwtValid(std::string_view v) {
  size_t d1 = v.find('.');
  if (d1 == std::string_view::npos) return false;
  size_t d2 = v.find('.', d1 + 1);
  if (d2 == std::string_view::npos || v.find('.', d2 + 1) != std::string_view::npos) return false;
  std::string header;
  if (!Base64UrlDecode(v.substr(0, d1), &header)) return false;
  std::string payload;
  if (!Base64UrlDecode(v.substr(d1 + 1, d2 - d1 - 1), &payload)) return false;
  nlohmann::json h = nlohmann::json::parse(header, nullptr, /*allow_exceptions=*/false);
  if (h.is_discarded() || !h.is_object()) return false;
  auto it = h.find("alg");
  return it != h.end() && it->is_string();
}

double ShannonEntropyBitsPerChar(std::string_view s) {
  if (s.empty()) return 0.0;
  std::array<int, 256> count{};
  for (unsigned char c : s) ++count[c];
  double h = 0.0, n = static_cast<double>(s.size());
  for (int c : count) {
    if (c == 0) continue;
    double p = c / n;
    h -= p * std::log2(p);
  }
  return h;
}

bool PhoneE164Valid(std::string_view value) {
  if (value.empty() || value[0] != '+') return false;
  std::string d;
  if (!DigitsOnly(value.substr(1), " .-()", &d) || d.empty() || d[0] == '0') return false;
  for (const auto& c : kPhoneCountries) {
    std::string_view cc = c.cc;
    if (d.compare(0, cc.size(), cc) == 0) {
      size_t nsn = d.size() - cc.size();
      if (nsn > 0 && d[cc.size()] == '0') return false;  // trunk 0 written after the code
      return NsnLengthOk(c, nsn);
    }
  }
  return d.size() >= 8 && d.size() <= 15;  // E.164 caps numbers at 15 digits
}

bool PhoneNationalValid(std::string_view region, std::string_view value) {
  const PhoneCountry* c = PhoneByRegion(region);
  if (c == nullptr) return false;
  std::string d;
  if (!DigitsOnly(value, " .-/()", &d) || d.empty()) return false;
  if (std::string_view(c->region) == "US") {
    // NANP: NPA-NXX-XXXX, area and exchange start 2-9.
    return d.size() == 10 && d[0] >= '2' && d[3] >= '2';
  }
  if (std::string_view(c->region) == "IN") {
    if (d.size() == 11 && d[0] == '0') d.erase(0, 1);
    return d.size() == 10 && d[0] >= '6';
  }
  if (d[0] != '0') return false;  // trunk prefix 0 in GB, DE, FR, JP
  if (d.size() > 1 && d[1] == '0') return false;  // "00": international access, not a national number
  if (std::string_view(c->region) == "JP" && d.compare(0, 3, "010") == 0) {
    return false;  // Japan's international access code (from memory)
  }
  return NsnLengthOk(*c, d.size() - 1);
}

}  // namespace prefsift::screen
