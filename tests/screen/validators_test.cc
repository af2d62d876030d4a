// Worked examples and published reserved values for the validators.
// Sources are named beside each check. [V]: checked against the named source;
// "from memory": not checked against it.
#include <gtest/gtest.h>

#include "screen/validators.h"

namespace prefsift::screen {
namespace {

TEST(Luhn, PublishedWorkedExample) {
  // ISO/IEC 7812-1 Luhn; worked example 7992739871 -> check digit 3 [V].
  EXPECT_TRUE(LuhnValid("79927398713"));
  EXPECT_FALSE(LuhnValid("79927398710"));
}

TEST(PaymentCard, TestCardNumbers) {
  // Published test card numbers (list from memory); their Luhn validity checked with python3-stdnum 1.18
  // (stdnum.luhn.is_valid), as is the invalidity of 4111111111111112.
  EXPECT_TRUE(PaymentCardValid("4111111111111111"));
  EXPECT_TRUE(PaymentCardValid("5555555555554444"));
  EXPECT_TRUE(PaymentCardValid("378282246310005"));
  EXPECT_TRUE(PaymentCardValid("4111 1111 1111 1111"));
  EXPECT_FALSE(PaymentCardValid("4111111111111112"));
  EXPECT_FALSE(PaymentCardValid("0000000000000000"));  // all one digit: not a card (our choice)
}

TEST(Iban, PublishedExamples) {
  // ISO 13616 / ISO/IEC 7064 MOD 97-10 worked example [V].
  EXPECT_TRUE(IbanValid("GB82 WEST 1234 5698 7654 32"));
  EXPECT_TRUE(IbanValid("GB82WEST12345698765432"));
  EXPECT_TRUE(IbanValid("GR16 0110 1250 0000 0001 2300 695"));  // [V]
  EXPECT_TRUE(IbanValid("DE89 3704 0044 0532 0130 00"));        // computed; "published" from memory
  EXPECT_FALSE(IbanValid("GB82 TEST 1234 5698 7654 32"));       // mod 97 = 5 [V]
  EXPECT_FALSE(IbanValid("GB82 WEST 1234 5698 7654 3"));        // wrong length for GB
}

TEST(UsSsn, NeverIssuedRanges) {
  // SSA "SSN Randomization FAQ" (ssa.gov/employer/randomizationfaqs.html) [V]:
  // area 000, 666, 900-999; group 00; serial 0000 are never assigned.
  EXPECT_FALSE(UsSsnValid("000-12-3456"));
  EXPECT_FALSE(UsSsnValid("666-12-3456"));
  EXPECT_FALSE(UsSsnValid("912-34-5678"));
  EXPECT_FALSE(UsSsnValid("999-34-5678"));
  EXPECT_FALSE(UsSsnValid("123-00-4567"));
  EXPECT_FALSE(UsSsnValid("123-45-0000"));
  EXPECT_TRUE(UsSsnValid("123-45-6789"));
  EXPECT_TRUE(UsSsnValid("665-12-3456"));
  EXPECT_TRUE(UsSsnValid("899-12-3456"));
}

TEST(Ip, DocumentationRanges) {
  // RFC 5737 [V] and RFC 3849 [S] documentation ranges are ordinary addresses.
  EXPECT_TRUE(Ipv4Valid("192.0.2.1"));
  EXPECT_TRUE(Ipv4Valid("198.51.100.255"));
  EXPECT_TRUE(Ipv4Valid("203.0.113.0"));
  EXPECT_FALSE(Ipv4Valid("10.0.0.300"));
  EXPECT_FALSE(Ipv4Valid("192.0.2.01"));  // leading zero: refused, as Python ipaddress does
  EXPECT_TRUE(Ipv6Valid("2001:db8::1"));
  EXPECT_TRUE(Ipv6Valid("2001:0db8:0000:0000:0000:ff00:0042:8329"));
  EXPECT_TRUE(Ipv6Valid("::ffff:192.0.2.128"));
  EXPECT_FALSE(Ipv6Valid("2001:db8::1::2"));
  EXPECT_FALSE(Ipv6Valid("12:30:45"));
}

TEST(Email, Rfc5321LengthLimits) {
  // RFC 5321 4.5.3.1.1: local part <= 64 octets [V].
  const std::string dom = "@example.com";
  EXPECT_TRUE(EmailValid(std::string(64, 'a') + dom));
  EXPECT_FALSE(EmailValid(std::string(65, 'a') + dom));
  // RFC 3696 erratum 1690: whole address <= 254 [V].
  auto of_length = [](size_t total) {
    std::string local(64, 'b');
    std::string d = "example.com";
    while (local.size() + 1 + d.size() < total) {
      size_t need = total - (local.size() + 1 + d.size()) - 1;
      d = std::string(std::min<size_t>(63, std::max<size_t>(1, need)), 'c') + "." + d;
    }
    return local + "@" + d;
  };
  ASSERT_EQ(of_length(254).size(), 254u);
  ASSERT_EQ(of_length(255).size(), 255u);
  EXPECT_TRUE(EmailValid(of_length(254)));
  EXPECT_FALSE(EmailValid(of_length(255)));
}

TEST(Jwt, Rfc7519Example) {
  // RFC 7519 section 3.1 example JWT (header {"typ":"JWT",\r\n "alg":"HS256"}), from memory.
  EXPECT_TRUE(JwtValid(
      "eyJ0eXAiOiJKV1QiLA0KICJhbGciOiJIUzI1NiJ9."
      "eyJpc3MiOiJqb2UiLA0KICJleHAiOjEzMDA4MTkzODAsDQogImh0dHA6Ly9leGFtcGxlLmNvbS9pc19yb290Ijp0cnVlfQ."
      "dBjftJeZ4CVP-mB92K27uhbUJU1p1r_wW1gFWFOEjXk"));
  // Header {"typ":"JWT"} without "alg": refused.
  EXPECT_FALSE(JwtValid("eyJ0eXAiOiJKV1QifQ.eyJhIjoxfQ.sig"));
}

TEST(Entropy, ShannonOfSimpleStrings) {
  // Shannon entropy: H = -sum p log2 p; "abcd" = 2 bits, "aaaa" = 0 (definition).
  EXPECT_DOUBLE_EQ(ShannonEntropyBitsPerChar("abcd"), 2.0);
  EXPECT_DOUBLE_EQ(ShannonEntropyBitsPerChar("aaaa"), 0.0);
}

}  // namespace
}  // namespace prefsift::screen
