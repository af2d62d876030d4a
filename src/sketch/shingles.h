// Shingling of already-normalised text into 64-bit hashes.
//
// Input is UTF-8 text that was normalised elsewhere (NFKC + casefold + runs of
// whitespace folded to one space). This unit only splits and hashes:
//   * word mode: words are the word segments of Unicode's word-boundary rules
//     (UAX #29, the subset in WordSegments below); punctuation, symbols and
//     white space between them are not words, so "changed ." and "changed."
//     give the same words. A shingle is n consecutive words (word n-gram).
//   * character mode: a shingle is n consecutive Unicode code points (the
//     UTF-8 is decoded here; a malformed byte decodes to U+FFFD). Meant for
//     scripts written without spaces between words (Han, Kana, Hangul, Thai,
//     Lao, Khmer, Myanmar).
// A text with fewer than n units (words or code points) is one shingle: the
// whole text. The empty text is one shingle too, so two empty texts compare
// as equal (Jaccard 1) rather than undefined.
//
// Every shingle is XXH3_64bits of its units with a caller-chosen seed, so the
// same text and seed always give the same hashes, on any machine.
//
// Thread-safety: all functions are pure and may be called concurrently.
#pragma once

#include <cstddef>
#include <cstdint>
#include <string_view>
#include <vector>

namespace prefsift::sketch {

enum class ShingleMode {
  kAuto,   // character mode if NoSpaceScriptShare(text) >= no_space_share
  kWords,  // always word n-grams
  kChars,  // always code-point n-grams
};

struct ShingleOptions {
  ShingleMode mode = ShingleMode::kAuto;
  // Word n-gram length. 5 follows Lee et al. 2022 (see docs/near-duplicates.md).
  int word_n = 5;
  // Code-point n-gram length; 5 so that one edited unit touches n shingles in
  // either mode.
  int char_n = 5;
  // kAuto switches to character mode when at least this share of the
  // non-space code points belongs to a script written without spaces.
  double no_space_share = 0.3;
  uint64_t seed = 0x70726566u;  // "pref"
};

// Word-boundary class of a code point, the subset of UAX #29's Word_Break
// property that WordSegments uses (docs/normalisation.md). Letters of scripts
// written without spaces (IsNoSpaceScript) are kIdeo: each is a word alone.
enum class WordClass : uint8_t {
  kOther, kLetter, kNumeric, kMidLetter, kMidNum, kMidNumLet, kExtendNumLet, kExtend, kSpace, kIdeo
};
WordClass WordClassOf(char32_t cp);

// Words of `text`: the segments of UAX #29 word boundaries (rules WB4-WB13b
// without the Hebrew, Katakana, emoji and regional-indicator rules) that hold
// a letter or a digit. "don't", "3.5", "e.g" and "snake_case" are one word each;
// "a.b." gives "a.b". The views point into `text`; invalid UTF-8 bytes are
// kOther.
std::vector<std::string_view> Words(std::string_view text);

// Number of words, as Words(text).size() but without allocating.
size_t CountWords(std::string_view text);

// Decodes UTF-8 to code points. A malformed or truncated sequence, an overlong
// form, a surrogate or a value above U+10FFFF yields U+FFFD and advances one byte.
std::vector<char32_t> DecodeUtf8(std::string_view text);

// True if `cp` is in a block of a script written without spaces between
// words: Han (CJK Unified Ideographs and extensions, compatibility
// ideographs), Hiragana, Katakana, Hangul, Thai, Lao, Khmer, Myanmar.
bool IsNoSpaceScript(char32_t cp);

// Share of non-whitespace code points of `text` for which IsNoSpaceScript
// holds; 0 for text without non-whitespace code points.
double NoSpaceScriptShare(std::string_view text);

// The mode kAuto resolves to for `text` (never returns kAuto).
ShingleMode ResolveMode(std::string_view text, const ShingleOptions& options);

// Sorted, duplicate-free shingle hashes of `text` in the mode the options
// select. REQUIRES: options.word_n >= 1 and options.char_n >= 1.
std::vector<uint64_t> Shingles(std::string_view text, const ShingleOptions& options);

// Sorted, duplicate-free hashes of the word n-grams of `text` (a text with
// fewer than n words gives one hash of all its words). Same hashing as word
// mode of Shingles, so e.g. n = 13 serves an overlap/leakage check.
// REQUIRES: n >= 1.
std::vector<uint64_t> WordNgramHashes(std::string_view text, int n, uint64_t seed);

// Sorted, duplicate-free hashes of the code-point n-grams of `text`.
// REQUIRES: n >= 1.
std::vector<uint64_t> CharNgramHashes(std::string_view text, int n, uint64_t seed);

// Keys of the word n-grams of `text`, appended to *out in text order
// (duplicates included), for comparing sets of n-grams within one run only
// (the near stage's near-identical candidates): the same words and n-grams as
// word mode of AppendShingles, but keyed by a cheaper mix than XXH3, so the
// keys are not AppendShingles' hashes and must never be compared with them or
// stored. Distinct n-grams share a key with chance about 2^-64 a pair, as
// with XXH3; set sizes and intersections, and so Jaccard similarities, are the
// same as over AppendShingles' hashes but for such a coincidence. A text with
// fewer than n words is one shingle, as there. REQUIRES: n >= 1.
void AppendWordGramKeys(std::string_view text, int n, std::vector<uint64_t>* out);
// The same keys with the plain chaining loop for every n, over the word keys
// once all are found (AppendWordGramKeys chains n = 3 as it finds each word
// and unrolls n = 5); the reference of a differential test.
void AppendWordGramKeysReference(std::string_view text, int n, std::vector<uint64_t>* out);

// Appends the hash of every shingle of `text` to *out in text order,
// duplicates included (no sort). The signer uses this to avoid building a set.
// REQUIRES: as Shingles; out != nullptr.
void AppendShingles(std::string_view text, const ShingleOptions& options,
                    std::vector<uint64_t>* out);

}  // namespace prefsift::sketch
