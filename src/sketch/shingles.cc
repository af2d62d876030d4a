// Word and code-point shingling; see shingles.h.
#include "sketch/shingles.h"

#include <utf8proc.h>

#include <algorithm>
#include <array>
#include <atomic>
#include <bit>
#include <cstring>
#include <type_traits>

#if defined(__SSE2__)
#include <emmintrin.h>
#endif
#if defined(__x86_64__) && defined(__GNUC__)
#include <immintrin.h>
// AVX2 and AVX-512BW paths, chosen at run time (the build targets the x86-64
// baseline); their functions carry these targets.
#define PREFSIFT_WORD_SCAN_X86 1
#define PREFSIFT_TARGET_AVX2 gnu::target("avx2,bmi,bmi2")
#define PREFSIFT_TARGET_AVX512 gnu::target("avx512bw,bmi,bmi2")
#endif

#include "sketch/mix.h"
#include "sketch/word_scan_path.h"

#include "sketch/xxh3_small.h"

namespace prefsift::sketch {
namespace {

using detail::WordScanPath;

// Distinct seeds for the two stages of word hashing and for character mode,
// so a one-word text and a one-code-point text never share a hash by design.
constexpr uint64_t kWordSeedTweak = 0x9e3779b97f4a7c15ULL;
constexpr uint64_t kGramSeedTweak = 0xc2b2ae3d27d4eb4fULL;
constexpr uint64_t kCharSeedTweak = 0x165667b19e3779f9ULL;

inline bool IsSpaceByte(unsigned char c) {
  return c == ' ' || c == '\t' || c == '\n' || c == '\r' || c == '\v' || c == '\f';
}

bool IsWhitespaceCp(char32_t cp) {
  return cp == U' ' || cp == U'\t' || cp == U'\n' || cp == U'\r' || cp == U'\v' ||
         cp == U'\f' || cp == 0x85 || cp == 0xA0 || cp == 0x1680 ||
         (cp >= 0x2000 && cp <= 0x200A) || cp == 0x2028 || cp == 0x2029 ||
         cp == 0x202F || cp == 0x205F || cp == 0x3000;
}

// Decodes one code point at text[i]; sets *len to the bytes consumed.
char32_t DecodeOne(std::string_view text, size_t i, size_t* len) {
  const auto b0 = static_cast<unsigned char>(text[i]);
  *len = 1;
  if (b0 < 0x80) return b0;
  int need;
  char32_t cp;
  char32_t min;
  if (b0 >= 0xC2 && b0 <= 0xDF) {
    need = 1; cp = b0 & 0x1F; min = 0x80;
  } else if (b0 >= 0xE0 && b0 <= 0xEF) {
    need = 2; cp = b0 & 0x0F; min = 0x800;
  } else if (b0 >= 0xF0 && b0 <= 0xF4) {
    need = 3; cp = b0 & 0x07; min = 0x10000;
  } else {
    return 0xFFFD;
  }
  if (text.size() - i <= static_cast<size_t>(need)) return 0xFFFD;
  for (int k = 1; k <= need; ++k) {
    const auto b = static_cast<unsigned char>(text[i + static_cast<size_t>(k)]);
    if ((b & 0xC0) != 0x80) return 0xFFFD;
    cp = (cp << 6) | (b & 0x3F);
  }
  if (cp < min || cp > 0x10FFFF || (cp >= 0xD800 && cp <= 0xDFFF)) return 0xFFFD;
  *len = static_cast<size_t>(need) + 1;
  return cp;
}

// ASCII classes as a table (the common case); the rest via WordClassOf.
struct AsciiWordClasses {
  std::array<WordClass, 128> c{};
  AsciiWordClasses() {
    for (int b = 0; b < 128; ++b) c[static_cast<size_t>(b)] = WordClassOf(static_cast<char32_t>(b));
  }
};

// Class of the code point at text[i] (ASCII by table); *len its bytes.
inline WordClass ClassAt(std::string_view text, size_t i, size_t* len) {
  static const AsciiWordClasses k;
  const auto b = static_cast<unsigned char>(text[i]);
  if (b < 0x80) {
    *len = 1;
    return k.c[b];
  }
  const char32_t cp = DecodeOne(text, i, len);
  return cp == 0xFFFD && *len == 1 ? WordClass::kOther : WordClassOf(cp);
}

inline bool IsWordish(WordClass c) {
  return c == WordClass::kLetter || c == WordClass::kNumeric || c == WordClass::kExtendNumLet;
}

// The word classes of one 64-byte block of ASCII text as bit masks (bit k is
// byte k): no ASCII byte is Extend, Format or Ideo, so these five classes
// decide its words. `high` marks bytes >= 0x80: such a block is not ASCII and
// the general loop takes over.
struct AsciiClasses {
  uint64_t letter = 0, digit = 0, under = 0, mid_letter = 0, mid_num = 0, high = 0;
};

AsciiClasses ShiftDown(AsciiClasses c, unsigned k) {
  return {c.letter >> k, c.digit >> k, c.under >> k, c.mid_letter >> k, c.mid_num >> k, c.high >> k};
}

// The masks a byte at a time from a table of WordClassOf: the fallback
// without SSE2 and the plainest path for the differential test.
struct ScalarClasses {
  enum : uint8_t { kL = 1, kD = 2, kU = 4, kMl = 8, kMn = 16, kHigh = 32 };
  struct Flags {
    uint8_t of[256] = {};
    Flags() {
      for (int b = 0; b < 256; ++b) {
        if (b >= 0x80) {
          of[b] = kHigh;
          continue;
        }
        switch (WordClassOf(static_cast<char32_t>(b))) {
          case WordClass::kLetter: of[b] = kL; break;
          case WordClass::kNumeric: of[b] = kD; break;
          case WordClass::kExtendNumLet: of[b] = kU; break;
          case WordClass::kMidLetter: of[b] = kMl; break;
          case WordClass::kMidNum: of[b] = kMn; break;
          case WordClass::kMidNumLet: of[b] = kMl | kMn; break;
          default: break;
        }
      }
    }
  };
  static AsciiClasses Block(const unsigned char* p, size_t len) {
    static const Flags flags;
    AsciiClasses c;
    for (size_t k = 0; k < len; ++k) {
      const uint64_t f = flags.of[p[k]];
      c.letter |= (f & 1) << k;
      c.digit |= ((f >> 1) & 1) << k;
      c.under |= ((f >> 2) & 1) << k;
      c.mid_letter |= ((f >> 3) & 1) << k;
      c.mid_num |= ((f >> 4) & 1) << k;
      c.high |= ((f >> 5) & 1) << k;
    }
    return c;
  }
  static AsciiClasses Full(const unsigned char* p) { return Block(p, 64); }
  static AsciiClasses Tail(const unsigned char* p, size_t len, size_t) { return Block(p, len); }
};

// The last `len` (< 64) bytes of a text of `size` bytes, for a classifier
// that reads whole blocks: when the text has 64 bytes, the block that ends
// with the text's end, shifted down (no copy); else the bytes copied into a
// block of zeros (a zero byte is in no class).
template <typename C>
[[gnu::always_inline]] inline AsciiClasses WholeBlockTail(const unsigned char* p, size_t len, size_t size) {
  if (size >= 64) return ShiftDown(C::Full(p + len - 64), static_cast<unsigned>(64 - len));
  alignas(64) unsigned char block[64] = {};
  std::memcpy(block, p, len);
  return C::Full(block);
}

#if defined(__SSE2__)
// 16 bytes a step: a compare (or two, for a range) and a movemask per class.
struct Sse2Classes {
  [[gnu::always_inline]] static AsciiClasses Full(const unsigned char* p) {
    AsciiClasses c;
    for (int q = 0; q < 4; ++q) {
      const __m128i v = _mm_loadu_si128(reinterpret_cast<const __m128i*>(p + q * 16));
      auto in_range = [](__m128i x, char lo, char span) {  // lo <= x <= lo + span, unsigned
        const __m128i off = _mm_sub_epi8(x, _mm_set1_epi8(lo));
        return _mm_cmpeq_epi8(_mm_min_epu8(off, _mm_set1_epi8(span)), off);
      };
      auto eq = [v](char ch) { return _mm_cmpeq_epi8(v, _mm_set1_epi8(ch)); };
      auto bits = [q](__m128i m) {
        return static_cast<uint64_t>(static_cast<uint16_t>(_mm_movemask_epi8(m))) << (q * 16);
      };
      c.letter |= bits(in_range(_mm_or_si128(v, _mm_set1_epi8(0x20)), 'a', 25));
      c.digit |= bits(in_range(v, '0', 9));
      c.under |= bits(eq('_'));
      const __m128i mid_num_let = _mm_or_si128(eq('.'), eq('\''));
      c.mid_letter |= bits(_mm_or_si128(mid_num_let, eq(':')));
      c.mid_num |= bits(_mm_or_si128(mid_num_let, _mm_or_si128(eq(','), eq(';'))));
      c.high |= bits(v);  // the movemask of the bytes themselves: their top bits
    }
    return c;
  }
  [[gnu::always_inline]] static AsciiClasses Tail(const unsigned char* p, size_t len, size_t size) {
    return WholeBlockTail<Sse2Classes>(p, len, size);
  }
};
#endif

#if defined(PREFSIFT_WORD_SCAN_X86)
// The same masks 32 bytes a step (AVX2, chosen at run time: the build
// targets the x86-64 baseline). Functions with a target attribute are
// inlined only into callers with the same target, hence the attribute on
// each and `flatten` on the scan that uses them (ScanAsciiWordsAvx2).
struct Avx2Classes {
  // Bytes x with lo <= x <= lo + span (unsigned); a lambda would not carry the target.
  [[PREFSIFT_TARGET_AVX2]] static __m256i InRange(__m256i x, char lo, char span) {
    const __m256i off = _mm256_sub_epi8(x, _mm256_set1_epi8(lo));
    return _mm256_cmpeq_epi8(_mm256_min_epu8(off, _mm256_set1_epi8(span)), off);
  }
  [[PREFSIFT_TARGET_AVX2]] static __m256i Eq(__m256i x, char ch) { return _mm256_cmpeq_epi8(x, _mm256_set1_epi8(ch)); }
  [[PREFSIFT_TARGET_AVX2]] static uint64_t Bits(__m256i m) {
    return static_cast<uint32_t>(_mm256_movemask_epi8(m));
  }
  [[PREFSIFT_TARGET_AVX2]] static AsciiClasses Full(const unsigned char* p) {
    AsciiClasses c;
    for (int h = 0; h < 2; ++h) {
      const __m256i v = _mm256_loadu_si256(reinterpret_cast<const __m256i*>(p + h * 32));
      const int at = h * 32;
      c.letter |= Bits(InRange(_mm256_or_si256(v, _mm256_set1_epi8(0x20)), 'a', 25)) << at;
      c.digit |= Bits(InRange(v, '0', 9)) << at;
      c.under |= Bits(Eq(v, '_')) << at;
      const __m256i mid_num_let = _mm256_or_si256(Eq(v, '.'), Eq(v, '\''));
      c.mid_letter |= Bits(_mm256_or_si256(mid_num_let, Eq(v, ':'))) << at;
      c.mid_num |= Bits(_mm256_or_si256(mid_num_let, _mm256_or_si256(Eq(v, ','), Eq(v, ';')))) << at;
      c.high |= Bits(v) << at;
    }
    return c;
  }
  [[PREFSIFT_TARGET_AVX2]] static AsciiClasses Tail(const unsigned char* p, size_t len, size_t size) {
    return WholeBlockTail<Avx2Classes>(p, len, size);
  }
};

// AVX-512BW: the block is one load (a masked one for the tail, which reads
// no byte past the text) and each class one compare into a 64-bit mask.
struct Avx512Classes {
  [[PREFSIFT_TARGET_AVX512]] static uint64_t InRange(__m512i x, char lo, char span) {
    return _mm512_cmple_epu8_mask(_mm512_sub_epi8(x, _mm512_set1_epi8(lo)), _mm512_set1_epi8(span));
  }
  [[PREFSIFT_TARGET_AVX512]] static uint64_t Eq(__m512i x, char ch) {
    return _mm512_cmpeq_epi8_mask(x, _mm512_set1_epi8(ch));
  }
  [[PREFSIFT_TARGET_AVX512]] static AsciiClasses Of(__m512i v) {
    AsciiClasses c;
    c.letter = InRange(_mm512_or_si512(v, _mm512_set1_epi8(0x20)), 'a', 25);
    c.digit = InRange(v, '0', 9);
    c.under = Eq(v, '_');
    const uint64_t mid_num_let = Eq(v, '.') | Eq(v, '\'');
    c.mid_letter = mid_num_let | Eq(v, ':');
    c.mid_num = mid_num_let | Eq(v, ',') | Eq(v, ';');
    c.high = _mm512_movepi8_mask(v);
    return c;
  }
  [[PREFSIFT_TARGET_AVX512]] static AsciiClasses Full(const unsigned char* p) { return Of(_mm512_loadu_si512(p)); }
  [[PREFSIFT_TARGET_AVX512]] static AsciiClasses Tail(const unsigned char* p, size_t len, size_t) {
    return Of(_mm512_maskz_loadu_epi8(_bzhi_u64(~uint64_t{0}, static_cast<unsigned>(len)), p));
  }
};
#endif

// Calls f(start, end) for the words of `text` by the masks of classifier C,
// as the general loop (ForEachWordFrom) would, while the text is ASCII:
// a word is a maximal run of letters, digits, '_' and the joiners of WB6/WB7
// (a MidLetter or MidNumLet byte between two letters) and WB11/WB12 (a MidNum
// or MidNumLet byte between two digits) that holds a letter or a digit.
// Returns true when the whole text was ASCII. Else it stops before the block
// ahead of the first one with a byte >= 0x80 (its joins need that block) and
// returns false with *resume a position where the general loop can go on:
// the start of a run still open there, or of that block, all words before it
// given. One block of look-ahead; masks are computed block by block, in
// registers.
template <typename C, typename F>
[[gnu::always_inline]] inline bool ScanAsciiWords(std::string_view text, F& f, size_t* resume) {
  const auto* bytes = reinterpret_cast<const unsigned char*>(text.data());
  const size_t n = text.size();
  if (n == 0) return true;
  const size_t blocks = (n + 63) / 64;
  auto classify = [&](size_t w) {
    const size_t rest = n - w * 64;
    return rest >= 64 ? C::Full(bytes + w * 64) : C::Tail(bytes + w * 64, rest, n);
  };
  AsciiClasses cur = classify(0);
  if (cur.high) {
    *resume = 0;
    return false;
  }
  uint64_t letter_carry = 0, digit_carry = 0;  // bit 63 of the previous block's letters, digits
  uint64_t open = 0;                           // 1 when a run goes on from the previous block
  size_t run_start = 0;                        // that run's start
  bool run_alnum = false;                      // whether it has a letter or digit so far
  for (size_t w = 0; w < blocks; ++w) {
    const AsciiClasses next = w + 1 < blocks ? classify(w + 1) : AsciiClasses{};
    if (next.high) {
      *resume = open ? run_start : w * 64;
      return false;
    }
    const uint64_t l = cur.letter, d = cur.digit;
    const uint64_t joins = (cur.mid_letter & (l << 1 | letter_carry) & (l >> 1 | next.letter << 63)) |
                           (cur.mid_num & (d << 1 | digit_carry) & (d >> 1 | next.digit << 63));
    const uint64_t alnum = l | d;
    const uint64_t in_word = alnum | cur.under | joins;
    // Bit p: a run starts or ends at p (starts and ends alternate).
    uint64_t edges = in_word ^ (in_word << 1 | open);
    const size_t base = w * 64;
    if (open) {  // the first edge ends the run from before
      if (edges == 0) {
        run_alnum = run_alnum || alnum != 0;
      } else {
        const unsigned e = static_cast<unsigned>(__builtin_ctzll(edges));
        edges &= edges - 1;
        if (run_alnum || (alnum & ((uint64_t{1} << e) - 1)) != 0) f(run_start, base + e);
      }
    }
    while (edges != 0) {
      const unsigned s = static_cast<unsigned>(__builtin_ctzll(edges));
      edges &= edges - 1;
      if (edges == 0) {  // the run goes on into the next block
        run_start = base + s;
        run_alnum = (alnum >> s) != 0;
        break;
      }
      const unsigned e = static_cast<unsigned>(__builtin_ctzll(edges));
      edges &= edges - 1;
      // A run without a letter or digit is all '_' (a joiner has letters or
      // digits on both sides), so only a run that starts with '_' needs the
      // check.
      if (((cur.under >> s) & 1) == 0 || ((alnum >> s) & ((uint64_t{1} << (e - s)) - 1)) != 0) {
        f(base + s, base + e);
      }
    }
    open = in_word >> 63;
    letter_carry = l >> 63;
    digit_carry = d >> 63;
    cur = next;
  }
  // A run open after the last block reaches the text's end (a block past the
  // end holds no class, so this happens only when the size is a multiple of 64).
  if (open && run_alnum) f(run_start, n);
  return true;
}

// The path segmenting ASCII text: the widest this CPU runs, chosen on first
// use (a race stores the same value), or the one a test forced.
std::atomic<uint8_t> g_word_scan_path{0xFF};  // 0xFF: not chosen yet

WordScanPath WidestWordScanPath() {
#if defined(PREFSIFT_WORD_SCAN_X86)
  __builtin_cpu_init();
  const bool bmi = __builtin_cpu_supports("bmi") && __builtin_cpu_supports("bmi2");
  if (bmi && __builtin_cpu_supports("avx512f") && __builtin_cpu_supports("avx512bw")) return WordScanPath::kAvx512;
  if (bmi && __builtin_cpu_supports("avx2")) return WordScanPath::kAvx2;
#endif
#if defined(__SSE2__)
  return WordScanPath::kSse2;
#else
  return WordScanPath::kScalar;
#endif
}

inline WordScanPath ActiveWordScanPath() {
  uint8_t p = g_word_scan_path.load(std::memory_order_relaxed);
  if (p == 0xFF) [[unlikely]] {
    p = static_cast<uint8_t>(WidestWordScanPath());
    g_word_scan_path.store(p, std::memory_order_relaxed);
  }
  return static_cast<WordScanPath>(p);
}

// The general loop from byte `from` (0, or a position ScanAsciiWords gave):
// calls f(start, end) for every word segment (byte offsets) of `text`, in
// order: UAX #29 rules WB4 (Extend and Format attach to what precedes),
// WB5-WB7 (letters, and letters joined by MidLetter/MidNumLet), WB8-WB12
// (digits, letters with digits, digits joined by MidNum/MidNumLet), WB13a/b
// (ExtendNumLet), WB999 (everything else breaks). Segments without a letter,
// digit or no-space-script character are not words and are skipped.
template <typename F>
void ForEachWordFrom(std::string_view text, size_t from, F&& f) {
  static const AsciiWordClasses ascii;
  const auto* bytes = reinterpret_cast<const unsigned char*>(text.data());
  const size_t size = text.size();
  size_t i = from;
  // Skips Extend/Format code points from j; returns the next position.
  auto skip_extend = [&](size_t j) {
    while (j < size) {
      size_t l;
      if (ClassAt(text, j, &l) != WordClass::kExtend) break;
      j += l;
    }
    return j;
  };
  // After a word character ending at j: no ASCII byte is Extend or Format,
  // so the skip is needed only before a non-ASCII byte (the same position
  // skip_extend would return, one call fewer a byte).
  auto after_word_char = [&](size_t j) { return j < size && bytes[j] >= 0x80 ? skip_extend(j) : j; };
  while (i < size) {
    size_t len = 1;
    WordClass c;
    if (bytes[i] < 0x80) {
      c = ascii.c[bytes[i]];  // never Ideo, Extend or Format
    } else {
      c = ClassAt(text, i, &len);
      if (c == WordClass::kIdeo) {
        const size_t end = skip_extend(i + len);
        f(i, end);
        i = end;
        continue;
      }
    }
    if (!IsWordish(c)) {
      i += len;
      continue;
    }
    const size_t start = i;
    WordClass prev = c;  // class of the last word character
    bool has_alnum = c != WordClass::kExtendNumLet;
    i = after_word_char(i + len);
    while (i < size) {
      size_t l1 = 1;
      WordClass n1;
      if (bytes[i] < 0x80) {
        n1 = ascii.c[bytes[i]];
        if (IsWordish(n1)) {  // the common case: the word goes on
          prev = n1;
          has_alnum = has_alnum || n1 != WordClass::kExtendNumLet;
          i = after_word_char(i + 1);
          continue;
        }
      } else {
        n1 = ClassAt(text, i, &l1);
      }
      if (IsWordish(n1)) {
        prev = n1;
        has_alnum = has_alnum || n1 != WordClass::kExtendNumLet;
        i = skip_extend(i + l1);
        continue;
      }
      const bool mid_letter = n1 == WordClass::kMidLetter || n1 == WordClass::kMidNumLet;
      const bool mid_num = n1 == WordClass::kMidNum || n1 == WordClass::kMidNumLet;
      if ((prev == WordClass::kLetter && mid_letter) || (prev == WordClass::kNumeric && mid_num)) {
        const size_t j = skip_extend(i + l1);
        if (j < size) {
          size_t l2;
          const WordClass n2 = ClassAt(text, j, &l2);
          if (n2 == prev) {  // WB6/WB7 (letter mid letter), WB11/WB12 (digit mid digit)
            i = skip_extend(j + l2);
            continue;
          }
        }
      }
      break;
    }
    if (has_alnum) f(start, i);
  }
}

// How ForEachWordWith finds words: the general loop alone, or the masks of
// classifier C while the text is ASCII.
struct GeneralScan {};
template <typename C>
struct MaskScan {
  using Classes = C;
};

// Calls f(start, end) for every word of `text` (see ForEachWordFrom), in
// order, the way `Scan` says.
template <typename Scan, typename F>
[[gnu::always_inline]] inline void ForEachWordWith(Scan, std::string_view text, F&& f) {
  size_t resume = 0;
  if constexpr (!std::is_same_v<Scan, GeneralScan>) {
    if (ScanAsciiWords<typename Scan::Classes>(text, f, &resume)) return;
  }
  ForEachWordFrom(text, resume, f);
}

// Returns body(scan) for the active path's scan. The caller's whole loop over
// the words is the body, so that what it keeps a word (a count, a buffer's
// end) stays in registers; each wide path is a function with its target and
// `flatten` (functions with a target are inlined only into callers with it),
// which inlines the body, the scan, the classifier and the callback into it.
#if defined(PREFSIFT_WORD_SCAN_X86)
template <typename Body>
[[PREFSIFT_TARGET_AVX2, gnu::flatten]] auto RunAvx2(Body& body) {
  return body(MaskScan<Avx2Classes>{});
}
template <typename Body>
[[PREFSIFT_TARGET_AVX512, gnu::flatten]] auto RunAvx512(Body& body) {
  return body(MaskScan<Avx512Classes>{});
}
#endif

template <typename Body>
auto WithWordScan(Body&& body) {
  switch (ActiveWordScanPath()) {
#if defined(PREFSIFT_WORD_SCAN_X86)
    case WordScanPath::kAvx512: return RunAvx512(body);
    case WordScanPath::kAvx2: return RunAvx2(body);
#endif
#if defined(__SSE2__)
    case WordScanPath::kSse2: return body(MaskScan<Sse2Classes>{});
#endif
    case WordScanPath::kScalar: return body(MaskScan<ScalarClasses>{});
    default: return body(GeneralScan{});  // kGeneral, or a path this build lacks (never chosen)
  }
}

// Per-word values of one text (word hashes, word keys) in a thread's buffer
// that only grows. Push keeps the count and room in registers when the
// object is a local of the loop (its address never escapes: Grow takes the
// buffer, not the object); a vector's push_back would load and store its end
// pointer in memory for every word, a dependency from one word to the next.
class WordValues {
 public:
  WordValues() : buffer_(Buffer()), data_(buffer_.data()), room_(buffer_.size()) {}
  void Push(uint64_t v) {
    if (size_ == room_) [[unlikely]] {
      data_ = Grow(buffer_);
      room_ = buffer_.size();
    }
    data_[size_++] = v;
  }
  // The values pushed; valid until the thread's next WordValues.
  const uint64_t* data() const { return data_; }
  size_t size() const { return size_; }

 private:
  static std::vector<uint64_t>& Buffer() {
    thread_local std::vector<uint64_t> buffer;
    return buffer;
  }
  [[gnu::noinline]] static uint64_t* Grow(std::vector<uint64_t>& buffer) {
    buffer.resize(std::max<size_t>(64, 2 * buffer.size()));
    return buffer.data();
  }
  std::vector<uint64_t>& buffer_;
  uint64_t* data_;
  size_t room_;
  size_t size_ = 0;
};

// Values pushed by a WordValues (which stays a local of the scan's body).
struct WordSpan {
  const uint64_t* data;
  size_t size;
};

void AppendWordShingles(std::string_view text, int n, uint64_t seed,
                        std::vector<uint64_t>* out) {
  const uint64_t word_seed = seed ^ kWordSeedTweak;
  const WordSpan word_hashes = WithWordScan([&](auto scan) {
    WordValues hashes;
    ForEachWordWith(scan, text, [&](size_t start, size_t end) {
      hashes.Push(Xxh3Seeded(text.data() + start, end - start, word_seed));
    });
    return WordSpan{hashes.data(), hashes.size()};
  });
  const uint64_t gram_seed = seed ^ kGramSeedTweak;
  const size_t un = static_cast<size_t>(n);
  if (word_hashes.size < un) {
    // Fewer than n words (including none): the whole text is one shingle.
    out->push_back(XXH3_64bits_withSeed(word_hashes.data, word_hashes.size * sizeof(uint64_t), gram_seed));
    return;
  }
  const size_t count = word_hashes.size - un + 1;
  const size_t at = out->size();
  out->resize(at + count);
  uint64_t* dst = out->data() + at;
  const uint64_t* words = word_hashes.data;
  if (un == 5) {  // the default: a constant length, so one path of the hash is left
    for (size_t k = 0; k < count; ++k) dst[k] = Xxh3Seeded(words + k, 5 * sizeof(uint64_t), gram_seed);
  } else {
    for (size_t k = 0; k < count; ++k) dst[k] = Xxh3Seeded(words + k, un * sizeof(uint64_t), gram_seed);
  }
}

// A word's key. Words of up to 7 bytes (most of them) are packed with their
// length into one 64-bit value, which the bijective Mix spreads: two such
// words never share a key. Longer words: XXH3 (seedless; these keys only meet
// each other).
[[gnu::always_inline]] inline uint64_t WordKey(std::string_view text, size_t start, size_t end) {
  const size_t len = end - start;
  if (len < 8) {
    uint64_t v = 0;
    if (std::endian::native == std::endian::little && start + 8 <= text.size()) {
      std::memcpy(&v, text.data() + start, 8);
      v &= (uint64_t{1} << (8 * len)) - 1;  // the word's bytes, as the memcpy below would place them
    } else {
      std::memcpy(&v, text.data() + start, len);
    }
    return Mix(v | (static_cast<uint64_t>(len) << 56));
  }
  return XXH3_64bits(text.data() + start, len);
}

void AppendCharShingles(std::string_view text, int n, uint64_t seed,
                        std::vector<uint64_t>* out) {
  thread_local std::vector<uint32_t> cps;
  cps.clear();
  size_t i = 0;
  while (i < text.size()) {
    size_t len;
    cps.push_back(static_cast<uint32_t>(DecodeOne(text, i, &len)));
    i += len;
  }
  const uint64_t char_seed = seed ^ kCharSeedTweak;
  const size_t un = static_cast<size_t>(n);
  if (cps.size() < un) {
    out->push_back(XXH3_64bits_withSeed(cps.data(), cps.size() * sizeof(uint32_t), char_seed));
    return;
  }
  const size_t count = cps.size() - un + 1;
  for (size_t k = 0; k < count; ++k) {
    out->push_back(Xxh3Seeded(cps.data() + k, un * sizeof(uint32_t), char_seed));
  }
}

void SortUnique(std::vector<uint64_t>* v) {
  std::sort(v->begin(), v->end());
  v->erase(std::unique(v->begin(), v->end()), v->end());
}

}  // namespace

namespace {

// An n-gram's key: its words' keys chained by multiply-rotate, then Mix.
inline uint64_t ChainKeys(const uint64_t* w, size_t count) {
  uint64_t h = kGramSeedTweak;
  for (size_t j = 0; j < count; ++j) h = std::rotl(h * 0x9e3779b97f4a7c15ULL, 27) ^ w[j];
  return Mix(h ^ count);
}

// ChainKeys with the count known at compile time: the loop unrolled and its
// first step (from the constant seed) folded; the same keys.
template <size_t N>
void ChainAllFixed(const uint64_t* words, size_t count, uint64_t* dst) {
  for (size_t k = 0; k < count; ++k) dst[k] = ChainKeys(words + k, N);
}

// AppendWordGramKeys for n = 3 with each 3-gram's key made as its last word
// is found, in the scan's loop (no second pass over the word keys).
void AppendWord3GramKeys(std::string_view text, std::vector<uint64_t>* out) {
  struct Result {
    WordSpan grams;
    uint64_t last[3];  // the last three word keys, the latest at [2]
    size_t words;
  };
  const Result r = WithWordScan([&](auto scan) {
    WordValues grams;
    uint64_t w0 = 0, w1 = 0, w2 = 0;
    size_t words = 0;
    ForEachWordWith(scan, text, [&](size_t start, size_t end) {
      w0 = w1;
      w1 = w2;
      w2 = WordKey(text, start, end);
      const uint64_t w[3] = {w0, w1, w2};
      if (++words >= 3) grams.Push(ChainKeys(w, 3));
    });
    return Result{{grams.data(), grams.size()}, {w0, w1, w2}, words};
  });
  if (r.words < 3) {  // fewer than 3 words (including none): the whole text is one shingle
    out->push_back(ChainKeys(r.last + 3 - r.words, r.words));
    return;
  }
  out->insert(out->end(), r.grams.data, r.grams.data + r.grams.size);
}

template <bool kFixed>
void AppendWordGramKeysImpl(std::string_view text, int n, std::vector<uint64_t>* out) {
  if (kFixed && n == 3) {
    AppendWord3GramKeys(text, out);
    return;
  }
  const WordSpan word_keys = WithWordScan([&](auto scan) {
    WordValues keys;
    ForEachWordWith(scan, text, [&](size_t start, size_t end) { keys.Push(WordKey(text, start, end)); });
    return WordSpan{keys.data(), keys.size()};
  });
  const uint64_t* const words = word_keys.data;
  const size_t un = static_cast<size_t>(n);
  if (word_keys.size < un) {  // fewer than n words (including none): the whole text is one shingle
    out->push_back(ChainKeys(words, word_keys.size));
    return;
  }
  const size_t count = word_keys.size - un + 1;
  const size_t at = out->size();
  out->resize(at + count);
  uint64_t* dst = out->data() + at;
  if (kFixed && un == 5) {
    ChainAllFixed<5>(words, count, dst);
  } else {
    for (size_t k = 0; k < count; ++k) dst[k] = ChainKeys(words + k, un);
  }
}

}  // namespace

void AppendWordGramKeys(std::string_view text, int n, std::vector<uint64_t>* out) {
  AppendWordGramKeysImpl<true>(text, n, out);
}

void AppendWordGramKeysReference(std::string_view text, int n, std::vector<uint64_t>* out) {
  AppendWordGramKeysImpl<false>(text, n, out);
}

namespace detail {

std::vector<WordScanPath> AvailableWordScanPaths() {
  std::vector<WordScanPath> paths = {WordScanPath::kGeneral, WordScanPath::kScalar};
#if defined(__SSE2__)
  paths.push_back(WordScanPath::kSse2);
#endif
  const WordScanPath widest = WidestWordScanPath();
  if (widest == WordScanPath::kAvx2 || widest == WordScanPath::kAvx512) paths.push_back(WordScanPath::kAvx2);
  if (widest == WordScanPath::kAvx512) paths.push_back(WordScanPath::kAvx512);
  return paths;
}

void ForceWordScanPath(WordScanPath path) {
  g_word_scan_path.store(static_cast<uint8_t>(path), std::memory_order_relaxed);
}

void ResetWordScanPath() { ForceWordScanPath(WidestWordScanPath()); }

const char* WordScanPathName(WordScanPath path) {
  switch (path) {
    case WordScanPath::kGeneral: return "general";
    case WordScanPath::kScalar: return "scalar";
    case WordScanPath::kSse2: return "sse2";
    case WordScanPath::kAvx2: return "avx2";
    case WordScanPath::kAvx512: return "avx512bw";
  }
  return "?";
}

}  // namespace detail

WordClass WordClassOf(char32_t cp) {
  if (cp < 0x80) {
    const auto b = static_cast<unsigned char>(cp);
    if ((b >= 'a' && b <= 'z') || (b >= 'A' && b <= 'Z')) return WordClass::kLetter;
    if (b >= '0' && b <= '9') return WordClass::kNumeric;
    if (IsSpaceByte(b) || b == ' ') return WordClass::kSpace;
    switch (b) {
      case '\'': case '.': return WordClass::kMidNumLet;
      case ':': return WordClass::kMidLetter;
      case ',': case ';': return WordClass::kMidNum;
      case '_': return WordClass::kExtendNumLet;
      default: return WordClass::kOther;
    }
  }
  switch (cp) {  // UAX #29 table 3 (Word_Break property values), the punctuation listed there
    case 0x2018: case 0x2019: case 0x2024: case 0xFE52: case 0xFF07: case 0xFF0E:
      return WordClass::kMidNumLet;
    case 0x00B7: case 0x0387: case 0x055F: case 0x05F4: case 0x2027: case 0xFE13: case 0xFE55: case 0xFF1A:
      return WordClass::kMidLetter;
    case 0x037E: case 0x0589: case 0x060C: case 0x060D: case 0x066C: case 0x07F8: case 0x2044: case 0xFE10:
    case 0xFE14: case 0xFE50: case 0xFE54: case 0xFF0C: case 0xFF1B:
      return WordClass::kMidNum;
    default: break;
  }
  if (cp > 0x10FFFF) return WordClass::kOther;
  if (IsWhitespaceCp(cp)) return WordClass::kSpace;
  switch (utf8proc_category(static_cast<utf8proc_int32_t>(cp))) {
    case UTF8PROC_CATEGORY_LU: case UTF8PROC_CATEGORY_LL: case UTF8PROC_CATEGORY_LT:
    case UTF8PROC_CATEGORY_LM: case UTF8PROC_CATEGORY_LO: case UTF8PROC_CATEGORY_NL:
      return IsNoSpaceScript(cp) ? WordClass::kIdeo : WordClass::kLetter;
    case UTF8PROC_CATEGORY_ND:
      return IsNoSpaceScript(cp) ? WordClass::kIdeo : WordClass::kNumeric;
    case UTF8PROC_CATEGORY_MN: case UTF8PROC_CATEGORY_ME: case UTF8PROC_CATEGORY_MC: case UTF8PROC_CATEGORY_CF:
      return WordClass::kExtend;
    case UTF8PROC_CATEGORY_PC:
      return WordClass::kExtendNumLet;
    case UTF8PROC_CATEGORY_ZS: case UTF8PROC_CATEGORY_ZL: case UTF8PROC_CATEGORY_ZP:
      return WordClass::kSpace;
    default:
      return WordClass::kOther;
  }
}

std::vector<std::string_view> Words(std::string_view text) {
  std::vector<std::string_view> words;
  WithWordScan([&](auto scan) {
    ForEachWordWith(scan, text, [&](size_t start, size_t end) { words.push_back(text.substr(start, end - start)); });
  });
  return words;
}

size_t CountWords(std::string_view text) {
  return WithWordScan([&](auto scan) {
    size_t count = 0;
    ForEachWordWith(scan, text, [&](size_t, size_t) { ++count; });
    return count;
  });
}

std::vector<char32_t> DecodeUtf8(std::string_view text) {
  std::vector<char32_t> cps;
  size_t i = 0;
  while (i < text.size()) {
    size_t len;
    cps.push_back(DecodeOne(text, i, &len));
    i += len;
  }
  return cps;
}

bool IsNoSpaceScript(char32_t cp) {
  return (cp >= 0x0E00 && cp <= 0x0E7F) ||    // Thai
         (cp >= 0x0E80 && cp <= 0x0EFF) ||    // Lao
         (cp >= 0x1000 && cp <= 0x109F) ||    // Myanmar
         (cp >= 0x1100 && cp <= 0x11FF) ||    // Hangul Jamo
         (cp >= 0x1780 && cp <= 0x17FF) ||    // Khmer
         (cp >= 0x19E0 && cp <= 0x19FF) ||    // Khmer Symbols
         (cp >= 0x2E80 && cp <= 0x2FDF) ||    // CJK Radicals Supplement, Kangxi Radicals
         (cp >= 0x3040 && cp <= 0x309F) ||    // Hiragana
         (cp >= 0x30A0 && cp <= 0x30FF) ||    // Katakana
         (cp >= 0x3130 && cp <= 0x318F) ||    // Hangul Compatibility Jamo
         (cp >= 0x31F0 && cp <= 0x31FF) ||    // Katakana Phonetic Extensions
         (cp >= 0x3400 && cp <= 0x4DBF) ||    // CJK Extension A
         (cp >= 0x4E00 && cp <= 0x9FFF) ||    // CJK Unified Ideographs
         (cp >= 0xA960 && cp <= 0xA97F) ||    // Hangul Jamo Extended-A
         (cp >= 0xA9E0 && cp <= 0xA9FF) ||    // Myanmar Extended-B
         (cp >= 0xAA60 && cp <= 0xAA7F) ||    // Myanmar Extended-A
         (cp >= 0xAC00 && cp <= 0xD7FF) ||    // Hangul Syllables, Jamo Extended-B
         (cp >= 0xF900 && cp <= 0xFAFF) ||    // CJK Compatibility Ideographs
         (cp >= 0xFF66 && cp <= 0xFFDC) ||    // half-width Katakana and Hangul
         (cp >= 0x1B000 && cp <= 0x1B16F) ||  // Kana Supplement/Extended-A, Small Kana
         (cp >= 0x20000 && cp <= 0x323AF);    // CJK Extensions B-H, compatibility supplement
}

double NoSpaceScriptShare(std::string_view text) {
  // Fast exit for pure ASCII text (the common case): 8 bytes at a time.
  {
    size_t i = 0;
    uint64_t high = 0;
    for (; i + 8 <= text.size(); i += 8) {
      uint64_t word;
      std::memcpy(&word, text.data() + i, 8);
      high |= word;
    }
    for (; i < text.size(); ++i) high |= static_cast<unsigned char>(text[i]);
    if ((high & 0x8080808080808080ULL) == 0) return 0.0;
  }
  size_t total = 0;
  size_t no_space = 0;
  size_t i = 0;
  while (i < text.size()) {
    const auto b = static_cast<unsigned char>(text[i]);
    if (b < 0x80) {  // ASCII fast path: never a no-space script
      if (!IsSpaceByte(b)) ++total;
      ++i;
      continue;
    }
    size_t len;
    const char32_t cp = DecodeOne(text, i, &len);
    i += len;
    if (IsWhitespaceCp(cp)) continue;
    ++total;
    if (IsNoSpaceScript(cp)) ++no_space;
  }
  return total == 0 ? 0.0 : static_cast<double>(no_space) / static_cast<double>(total);
}

ShingleMode ResolveMode(std::string_view text, const ShingleOptions& options) {
  if (options.mode != ShingleMode::kAuto) return options.mode;
  return NoSpaceScriptShare(text) >= options.no_space_share ? ShingleMode::kChars
                                                            : ShingleMode::kWords;
}

void AppendShingles(std::string_view text, const ShingleOptions& options,
                    std::vector<uint64_t>* out) {
  if (ResolveMode(text, options) == ShingleMode::kChars) {
    AppendCharShingles(text, options.char_n, options.seed, out);
  } else {
    AppendWordShingles(text, options.word_n, options.seed, out);
  }
}

std::vector<uint64_t> Shingles(std::string_view text, const ShingleOptions& options) {
  std::vector<uint64_t> out;
  AppendShingles(text, options, &out);
  SortUnique(&out);
  return out;
}

std::vector<uint64_t> WordNgramHashes(std::string_view text, int n, uint64_t seed) {
  std::vector<uint64_t> out;
  AppendWordShingles(text, n, seed, &out);
  SortUnique(&out);
  return out;
}

std::vector<uint64_t> CharNgramHashes(std::string_view text, int n, uint64_t seed) {
  std::vector<uint64_t> out;
  AppendCharShingles(text, n, seed, &out);
  SortUnique(&out);
  return out;
}

}  // namespace prefsift::sketch
