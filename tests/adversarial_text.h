// Texts for differential tests of byte scans (a fast scan against its plain
// reference): random bytes of every value mixed with pieces the scans look
// for (white space, line starts, refusal and URL openings, U+2019, U+3000,
// multi-byte UTF-8 whole and cut short), at lengths that cross 64-byte blocks.
// Our own generator; deterministic for a seed.
#pragma once

#include <cstdint>
#include <random>
#include <string>
#include <vector>

namespace prefsift::testing {

// One random text of about `length` bytes (it may run a few bytes over).
inline std::string AdversarialText(std::mt19937_64& rng, size_t length) {
  static const std::vector<std::string> kPieces = {
      " ", "  ", "\t", "\n", "\r\n", "\n\n", "\v", "\f", "\r", "    ", "- ", "* ", "+ ", "1. ", "12) ", "# ",
      "### ", "####### ", "```", "~~~", "   ```", "\t\t", "I'm sorry", "i am sorry", "I apologise", "MY apologies",
      "i cannot", "I can't help", "i\xE2\x80\x99m unable to", "As an AI", "as a language model", "i ", "i'", "I\xE2",
      "my", "As", "ht", "http://", "HTTPS://x", "www.", "WWW.a", "awww.b", "i\xE2\x80", "\xE2\x80\x99",
      "\xE2\x80", "\xE3\x80\x80", "\xE3\x80", "\xE3", "\x80\x80", "\xE3\xE3\x80\x80", "\xC3\xA9", "\xC3",
      "\xF0\x9F\x98\x80", "\xF0\x9F", "\xBF", "\xC0", "\xFF", std::string(1, '\0'), "word", "Words", "x"};
  std::string s;
  while (s.size() < length) {
    const uint64_t r = rng();
    switch (r % 4) {
      case 0: s.push_back(static_cast<char>((r >> 8) & 0xFF)); break;  // any byte value
      case 1: s.push_back(static_cast<char>('a' + (r >> 8) % 26)); break;
      default: s += kPieces[(r >> 8) % kPieces.size()]; break;
    }
  }
  return s;
}

// Lengths to try: every length up to 200 (each place in a block, 0..3
// blocks), then some long ones.
inline std::vector<size_t> AdversarialLengths() {
  std::vector<size_t> out;
  for (size_t n = 0; n <= 200; ++n) out.push_back(n);
  for (size_t n : {255u, 256u, 257u, 1000u, 4095u, 4096u, 4097u, 20000u}) out.push_back(n);
  return out;
}

}  // namespace prefsift::testing
