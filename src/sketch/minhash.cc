// One-permutation MinHash with optimal densification; see minhash.h.
//
// Most inputs are short (a prompt gives tens to a few hundred shingles, signed
// into 256 and 128 bins), so most bins are empty and the time goes to
// densification: each empty bin looks for the first filled bin along its probe
// sequence. The probes depend only on (seed, K), so each thread caches them for
// the few (seed, K) pairs in use (the near and leakage stages sign every prompt,
// with different K). With K <= 256 a bin number fits a byte, and the wide paths
// test 32 (AVX2) or 64 (AVX-512 VBMI) bins' probes at once with a few byte
// shuffles, one probe attempt at a time. The build targets the x86-64 baseline;
// the wide functions are compiled for their instruction sets with target
// attributes and chosen at run time (minhash_paths.h).
#include "sketch/minhash.h"

#include <algorithm>
#include <array>
#include <atomic>
#include <bit>
#include <limits>
#include <thread>

#include "sketch/minhash_paths.h"
#include "sketch/mix.h"

#if defined(__x86_64__) && defined(__GNUC__)
#include <immintrin.h>
#define PREFSIFT_SIGN_X86 1
#else
#define PREFSIFT_SIGN_X86 0
#endif

namespace prefsift::sketch {
namespace {

constexpr uint64_t kEmpty = std::numeric_limits<uint64_t>::max();
constexpr uint64_t kProbeSeedTweak = 0x5851f42d4c957f2dULL;

// floor(x * k / 2^64): maps a uniform 64-bit word to [0, k) by its high bits.
__extension__ typedef unsigned __int128 Uint128;
inline uint32_t Bin(uint64_t x, uint32_t k) {
  return static_cast<uint32_t>((static_cast<Uint128>(x) * k) >> 64);
}

// Bin probed by empty bin i at attempt (1-based).
inline uint32_t ProbeBin(uint64_t probe_seed, uint32_t i, uint64_t attempt, uint32_t k) {
  return Bin(Mix(probe_seed ^ ((static_cast<uint64_t>(i) << 32) | attempt)), k);
}

// Scalar path: each bin's first kCachedProbes probes, of which the first
// kSelectProbes are checked without branches.
constexpr uint32_t kCachedProbes = 16;
constexpr uint32_t kSelectProbes = 8;
constexpr uint32_t kNoBin = 0xffffffffu;
// Wide paths: K <= kWideMaxSlots, the first kWideProbes probes of every bin
// as bytes. With a quarter of 256 bins filled, the last of 190 empty bins is
// resolved after about 20 attempts; 64 also cover inputs of a dozen shingles.
constexpr uint32_t kWideMaxSlots = 256;
constexpr uint32_t kWideProbes = 64;

struct ProbeTable {
  uint64_t seed = 0;
  uint32_t k = 0;  // 0: unused
  uint64_t probe_seed = 0;
  std::vector<uint32_t> by_bin;     // k * kCachedProbes: bin i's probes at [i * kCachedProbes]
  std::vector<uint8_t> by_attempt;  // kWideProbes rows of WideStride(k) bytes: attempt a's probes of every bin
};

// Row length of ProbeTable::by_attempt: k rounded up to whole 64-byte vectors
// (the bytes past k are 0, a valid bin).
inline size_t WideStride(uint32_t k) { return (static_cast<size_t>(k) + 63) / 64 * 64; }

// This thread's probes for (seed, k). A few pairs are kept: each stage signs
// with its own K, and remaking a table for every call would cost more than
// the signing.
ProbeTable& Probes(uint64_t seed, uint32_t k) {
  constexpr size_t kTables = 4;
  thread_local std::array<ProbeTable, kTables> tables;
  thread_local size_t next = 0;
  for (ProbeTable& t : tables) {
    if (t.k == k && t.seed == seed) return t;
  }
  ProbeTable& t = tables[next];
  next = (next + 1) % kTables;
  t.seed = seed;
  t.k = k;
  t.probe_seed = Mix(seed ^ kProbeSeedTweak);
  t.by_bin.clear();
  t.by_attempt.clear();
  return t;
}

const uint32_t* ScalarProbes(ProbeTable& t) {
  if (t.by_bin.empty()) {
    t.by_bin.resize(static_cast<size_t>(t.k) * kCachedProbes);
    for (uint32_t i = 0; i < t.k; ++i) {
      for (uint32_t a = 0; a < kCachedProbes; ++a) {
        t.by_bin[static_cast<size_t>(i) * kCachedProbes + a] = ProbeBin(t.probe_seed, i, a + 1, t.k);
      }
    }
  }
  return t.by_bin.data();
}

// Fills each bin with the smallest mixed value falling in it, kEmpty where
// none does. x == kEmpty (probability 2^-64) is moved one below so that
// kEmpty can mark an empty bin. Branch-free bin minimum.
void FillBins(std::span<const uint64_t> shingles, uint64_t seed, uint32_t k, uint64_t* out) {
  std::fill(out, out + k, kEmpty);
  const uint64_t seed_mix = Mix(seed);
  for (uint64_t h : shingles) {
    uint64_t x = Mix(h ^ seed_mix);
    x -= static_cast<uint64_t>(x == kEmpty);
    const uint32_t bin = Bin(x, k);
    out[bin] = std::min(out[bin], x);
  }
}

// The first filled bin probed by empty bin i from attempt `from` on, hashing
// each probe (the probes the caches do not hold).
inline uint32_t ProbeOnward(uint64_t probe_seed, uint32_t i, uint64_t from, uint32_t k,
                            const uint8_t* is_filled) {
  for (uint64_t attempt = from;; ++attempt) {
    const uint32_t probe = ProbeBin(probe_seed, i, attempt, k);
    if (is_filled[probe]) return probe;
  }
}

// Optimal densification on the scalar path, any K: empty bin i probes bins
// j = h_i(1), h_i(2), ... (a seeded hash of (i, attempt)) and copies the
// first non-empty one.
void DensifyScalar(uint64_t* out, uint32_t k, uint64_t seed) {
  thread_local std::vector<uint8_t> filled;
  thread_local std::vector<uint32_t> empty;
  filled.resize(k);
  empty.resize(k);
  uint32_t num_empty = 0;
  for (uint32_t i = 0; i < k; ++i) {
    const bool is_empty = out[i] == kEmpty;
    filled[i] = static_cast<uint8_t>(!is_empty);
    empty[num_empty] = i;
    num_empty += static_cast<uint32_t>(is_empty);
  }
  if (num_empty == 0 || num_empty == k) return;
  ProbeTable& table = Probes(seed, k);
  const uint32_t* probes = ScalarProbes(table);
  const uint8_t* is_filled = filled.data();
  for (uint32_t e = 0; e < num_empty; ++e) {
    const uint32_t i = empty[e];
    const uint32_t* cached = &probes[static_cast<size_t>(i) * kCachedProbes];
    // Gather the filled flags of the first 8 probes into a byte (independent
    // loads), then the lowest set bit is the first filled probe.
    const uint32_t mask = static_cast<uint32_t>(is_filled[cached[0]]) |
                          static_cast<uint32_t>(is_filled[cached[1]]) << 1 |
                          static_cast<uint32_t>(is_filled[cached[2]]) << 2 |
                          static_cast<uint32_t>(is_filled[cached[3]]) << 3 |
                          static_cast<uint32_t>(is_filled[cached[4]]) << 4 |
                          static_cast<uint32_t>(is_filled[cached[5]]) << 5 |
                          static_cast<uint32_t>(is_filled[cached[6]]) << 6 |
                          static_cast<uint32_t>(is_filled[cached[7]]) << 7;
    uint32_t j = mask != 0 ? cached[std::countr_zero(mask)] : kNoBin;
    for (uint32_t a = kSelectProbes; a < kCachedProbes && j == kNoBin; ++a) {
      if (is_filled[cached[a]]) j = cached[a];
    }
    if (j == kNoBin) j = ProbeOnward(table.probe_seed, i, kCachedProbes + 1, k, is_filled);
    out[i] = out[j];
  }
}

#if PREFSIFT_SIGN_X86

const uint8_t* WideProbes(ProbeTable& t) {
  if (t.by_attempt.empty()) {
    const size_t stride = WideStride(t.k);
    t.by_attempt.assign(kWideProbes * stride, 0);
    for (uint32_t a = 0; a < kWideProbes; ++a) {
      for (uint32_t i = 0; i < t.k; ++i) {
        t.by_attempt[a * stride + i] = static_cast<uint8_t>(ProbeBin(t.probe_seed, i, a + 1, t.k));
      }
    }
  }
  return t.by_attempt.data();
}

// What a wide path leaves for the common finish: src[i] is the bin that bin
// i copies (i itself when filled), filled[i] 0xff for a filled bin, 0 else;
// unresolved[b] has bit l set when bin 64b+l is empty and none of its first
// kWideProbes probes hit.
struct WideScratch {
  alignas(64) std::array<uint8_t, kWideMaxSlots> src;
  alignas(64) std::array<uint8_t, kWideMaxSlots> filled;
  std::array<uint64_t, kWideMaxSlots / 64> unresolved;
};

// Resolves the bins the wide probes left over by hashing further probes.
void ResolveRest(WideScratch& w, uint32_t k, uint64_t probe_seed) {
  for (uint32_t b = 0; b < (k + 63) / 64; ++b) {
    for (uint64_t m = w.unresolved[b]; m != 0; m &= m - 1) {
      const uint32_t i = 64 * b + static_cast<uint32_t>(std::countr_zero(m));
      w.src[i] = static_cast<uint8_t>(ProbeOnward(probe_seed, i, kWideProbes + 1, k, w.filled.data()));
    }
  }
}

#define PREFSIFT_AVX512 __attribute__((target("avx512f,avx512bw,avx512vbmi")))
#define PREFSIFT_AVX2 __attribute__((target("avx2")))

// Bytes of the 256-byte table t0..t3 at the 64 indexes in r. kTables 1 and
// 2 serve K <= 64 and K <= 128 (indexes below 64 and 128); 4 looks up both
// halves and picks by the index's top bit.
template <int kTables>
PREFSIFT_AVX512 inline __m512i LookupAvx512(__m512i r, __m512i t0, __m512i t1, __m512i t2, __m512i t3) {
  if constexpr (kTables == 1) {
    // The zero-masked forms: GCC 12 warns that the plain ones' undefined
    // pass-through value "may be used uninitialized".
    return _mm512_maskz_permutexvar_epi8(~__mmask64{0}, r, t0);
  } else if constexpr (kTables == 2) {
    return _mm512_permutex2var_epi8(t0, r, t1);
  } else {
    const __m512i lo = _mm512_permutex2var_epi8(t0, r, t1);
    const __m512i hi = _mm512_permutex2var_epi8(t2, r, t3);
    return _mm512_mask_blend_epi8(_mm512_movepi8_mask(r), lo, hi);
  }
}

// For each block of 64 bins: the lanes of empty bins take the first probe
// whose bin is filled, attempt by attempt, until every lane has one.
template <int kTables>
PREFSIFT_AVX512 void ResolveAvx512(uint32_t k, const uint8_t* probes, WideScratch& w) {
  const __m512i t0 = _mm512_load_si512(w.filled.data());
  const __m512i t1 = _mm512_load_si512(w.filled.data() + 64);
  const __m512i t2 = _mm512_load_si512(w.filled.data() + 128);
  const __m512i t3 = _mm512_load_si512(w.filled.data() + 192);
  // Past 128 bins the flags are tested in a 256-bit map instead, in both
  // halves of a register: byte r / 8 (its index r >> 3 taken from 16-bit
  // lanes, so its bit 5 is junk, and the copy makes it not matter), then bit
  // r % 8. Fewer instructions than two two-table lookups and a blend.
  const __m512i map = _mm512_maskz_broadcast_i64x4(0xff, _mm256_setr_epi64x(
      static_cast<long long>(_mm512_movepi8_mask(t0)), static_cast<long long>(_mm512_movepi8_mask(t1)),
      static_cast<long long>(_mm512_movepi8_mask(t2)), static_cast<long long>(_mm512_movepi8_mask(t3))));
  const __m512i bit_of = _mm512_set1_epi64(static_cast<long long>(0x8040201008040201ULL));  // byte x: 1 << (x % 8)
  alignas(64) static constexpr std::array<uint8_t, 64> kLanes = [] {
    std::array<uint8_t, 64> a{};
    for (int i = 0; i < 64; ++i) a[i] = static_cast<uint8_t>(i);
    return a;
  }();
  const size_t stride = WideStride(k);
  for (uint32_t b = 0; b < stride / 64; ++b) {
    const uint32_t lanes = std::min<uint32_t>(64, k - 64 * b);
    const uint64_t past_k = lanes == 64 ? 0 : ~uint64_t{0} << lanes;
    uint64_t resolved = _mm512_movepi8_mask(_mm512_load_si512(w.filled.data() + 64 * b)) | past_k;
    __m512i src = _mm512_add_epi8(_mm512_load_si512(kLanes.data()), _mm512_set1_epi8(static_cast<char>(64 * b)));
    const uint8_t* row = probes + 64 * b;
    for (uint32_t a = 0; a < kWideProbes && resolved != ~uint64_t{0}; ++a, row += stride) {
      const __m512i r = _mm512_loadu_si512(row);
      uint64_t filled;
      if constexpr (kTables == 4) {
        const __m512i byte = _mm512_maskz_permutexvar_epi8(~__mmask64{0}, _mm512_srli_epi16(r, 3), map);
        filled = _mm512_test_epi8_mask(byte, _mm512_maskz_permutexvar_epi8(~__mmask64{0}, r, bit_of));
      } else {
        filled = _mm512_movepi8_mask(LookupAvx512<kTables>(r, t0, t1, t2, t3));
      }
      const uint64_t hit = filled & ~resolved;
      src = _mm512_mask_mov_epi8(src, hit, r);
      resolved |= hit;
    }
    _mm512_store_si512(w.src.data() + 64 * b, src);
    w.unresolved[b] = ~resolved;
  }
}

// Densification for K <= 256 with AVX-512 VBMI. Writes the full signature
// into out, or (compact != nullptr) its low bytes into compact only.
PREFSIFT_AVX512 void DensifyAvx512(uint64_t* out, uint32_t k, uint64_t seed, uint8_t* compact) {
  thread_local WideScratch w;
  const uint32_t blocks = (k + 63) / 64;
  const __m512i empty = _mm512_set1_epi64(static_cast<long long>(kEmpty));
  for (uint32_t b = 0; b < kWideMaxSlots / 64; ++b) {
    uint64_t filled = 0;
    for (uint32_t q = 0; q < 8 && 64 * b + 8 * q < k; ++q) {
      const uint32_t at = 64 * b + 8 * q;
      const __mmask8 lanes = static_cast<__mmask8>(k - at >= 8 ? 0xff : (1u << (k - at)) - 1);
      const __m512i v = _mm512_maskz_loadu_epi64(lanes, out + at);
      filled |= static_cast<uint64_t>(_mm512_mask_cmpneq_epu64_mask(lanes, v, empty)) << (8 * q);
    }
    _mm512_store_si512(w.filled.data() + 64 * b, _mm512_movm_epi8(filled));
  }
  ProbeTable& table = Probes(seed, k);
  const uint8_t* probes = WideProbes(table);
  if (blocks == 1) {
    ResolveAvx512<1>(k, probes, w);
  } else if (blocks == 2) {
    ResolveAvx512<2>(k, probes, w);
  } else {
    ResolveAvx512<4>(k, probes, w);
  }
  ResolveRest(w, k, table.probe_seed);
  if (compact == nullptr) {
    for (uint32_t i = 0; i < k; ++i) out[i] = out[w.src[i]];
    return;
  }
  // The low bytes of the filled bins as a table, looked up like the flags.
  alignas(64) std::array<uint8_t, kWideMaxSlots> low{};
  for (uint32_t at = 0; at < k; at += 8) {
    const __mmask8 lanes = static_cast<__mmask8>(k - at >= 8 ? 0xff : (1u << (k - at)) - 1);
    _mm_storel_epi64(reinterpret_cast<__m128i*>(low.data() + at),
                     _mm512_maskz_cvtepi64_epi8(0xff, _mm512_maskz_loadu_epi64(lanes, out + at)));
  }
  const __m512i t0 = _mm512_load_si512(low.data());
  const __m512i t1 = _mm512_load_si512(low.data() + 64);
  const __m512i t2 = _mm512_load_si512(low.data() + 128);
  const __m512i t3 = _mm512_load_si512(low.data() + 192);
  for (uint32_t b = 0; b < blocks; ++b) {
    const uint32_t lanes = std::min<uint32_t>(64, k - 64 * b);
    const uint64_t store = lanes == 64 ? ~uint64_t{0} : (uint64_t{1} << lanes) - 1;
    const __m512i src = _mm512_load_si512(w.src.data() + 64 * b);
    const __m512i bytes = blocks == 1   ? LookupAvx512<1>(src, t0, t1, t2, t3)
                          : blocks == 2 ? LookupAvx512<2>(src, t0, t1, t2, t3)
                                        : LookupAvx512<4>(src, t0, t1, t2, t3);
    _mm512_mask_storeu_epi8(compact + 64 * b, store, bytes);
  }
}

// Densification for K <= 256 with AVX2, 32 bins a vector. The filled flags
// are a 256-bit map; a probe's byte of it is looked up in the map's low or
// high 16 bytes (pshufb reads 16-byte tables) and its bit picked by a second
// shuffle.
PREFSIFT_AVX2 void DensifyAvx2(uint64_t* out, uint32_t k, uint64_t seed, uint8_t* compact) {
  thread_local WideScratch w;
  alignas(32) std::array<uint64_t, 4> map{};
  const __m256i empty = _mm256_set1_epi64x(-1);
  uint32_t i = 0;
  for (; i + 4 <= k; i += 4) {
    const __m256i v = _mm256_loadu_si256(reinterpret_cast<const __m256i*>(out + i));
    const auto is_empty = static_cast<uint64_t>(_mm256_movemask_pd(_mm256_castsi256_pd(_mm256_cmpeq_epi64(v, empty))));
    map[i / 64] |= (~is_empty & 0xf) << (i % 64);
  }
  for (; i < k; ++i) map[i / 64] |= static_cast<uint64_t>(out[i] != kEmpty) << (i % 64);
  for (i = 0; i < kWideMaxSlots; ++i) {
    w.filled[i] = static_cast<uint8_t>(0 - ((map[i / 64] >> (i % 64)) & 1));
  }
  ProbeTable& table = Probes(seed, k);
  const uint8_t* probes = WideProbes(table);
  const size_t stride = WideStride(k);
  const __m256i m = _mm256_load_si256(reinterpret_cast<const __m256i*>(map.data()));
  const __m256i map_lo = _mm256_permute2x128_si256(m, m, 0x00);
  const __m256i map_hi = _mm256_permute2x128_si256(m, m, 0x11);
  const __m256i bit_of = _mm256_set1_epi64x(0x8040201008040201);  // byte x: 1 << (x % 8)
  const __m256i low4 = _mm256_set1_epi8(0x0f);
  const __m256i low3 = _mm256_set1_epi8(0x07);
  const __m256i lane = _mm256_setr_epi8(0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16, 17, 18, 19,
                                        20, 21, 22, 23, 24, 25, 26, 27, 28, 29, 30, 31);
  for (uint32_t b = 0; b < stride / 32; ++b) {
    const uint32_t lanes = 32 * b < k ? std::min<uint32_t>(32, k - 32 * b) : 0;
    const uint32_t past_k = lanes == 32 ? 0 : ~uint32_t{0} << lanes;
    // done: lanes that have their bin (0xff), the filled ones from the start.
    __m256i done = _mm256_load_si256(reinterpret_cast<const __m256i*>(w.filled.data() + 32 * b));
    __m256i src = _mm256_add_epi8(lane, _mm256_set1_epi8(static_cast<char>(32 * b)));
    const uint8_t* row = probes + 32 * b;
    uint32_t resolved = static_cast<uint32_t>(_mm256_movemask_epi8(done)) | past_k;
    for (uint32_t a = 0; a < kWideProbes && resolved != ~uint32_t{0}; ++a, row += stride) {
      const __m256i r = _mm256_loadu_si256(reinterpret_cast<const __m256i*>(row));
      const __m256i at = _mm256_and_si256(_mm256_srli_epi16(r, 3), low4);
      // The map's byte r / 8 (the low or high half by r's top bit), then bit r % 8.
      const __m256i byte = _mm256_blendv_epi8(_mm256_shuffle_epi8(map_lo, at), _mm256_shuffle_epi8(map_hi, at), r);
      const __m256i bit = _mm256_shuffle_epi8(bit_of, _mm256_and_si256(r, low3));
      const __m256i hit = _mm256_cmpeq_epi8(_mm256_and_si256(byte, bit), bit);
      src = _mm256_blendv_epi8(src, r, _mm256_andnot_si256(done, hit));
      done = _mm256_or_si256(done, hit);
      resolved = static_cast<uint32_t>(_mm256_movemask_epi8(done)) | past_k;
    }
    _mm256_store_si256(reinterpret_cast<__m256i*>(w.src.data() + 32 * b), src);
    const uint64_t left = ~resolved;
    if (b % 2 == 0) {
      w.unresolved[b / 2] = left;
    } else {
      w.unresolved[b / 2] |= left << 32;
    }
  }
  ResolveRest(w, k, table.probe_seed);
  if (compact == nullptr) {
    for (i = 0; i < k; ++i) out[i] = out[w.src[i]];
  } else {
    for (i = 0; i < k; ++i) compact[i] = static_cast<uint8_t>(out[w.src[i]]);
  }
}

#endif  // PREFSIFT_SIGN_X86

using detail::SignPath;

SignPath BestSignPath() {
  static const SignPath best = [] {
#if PREFSIFT_SIGN_X86
    __builtin_cpu_init();
    if (__builtin_cpu_supports("avx512f") && __builtin_cpu_supports("avx512bw") &&
        __builtin_cpu_supports("avx512vbmi")) {
      return SignPath::kAvx512;
    }
    if (__builtin_cpu_supports("avx2")) return SignPath::kAvx2;
#endif
    return SignPath::kScalar;
  }();
  return best;
}

std::atomic<int> forced_path{-1};  // -1: the best available

// Signs into out (k bins); compact != nullptr: only its low bytes are wanted,
// written there (out then holds the bins before densification).
void SignInto(std::span<const uint64_t> shingles, const MinHashParams& params, uint64_t* out,
              uint8_t* compact) {
  const uint32_t k = params.num_slots;
  FillBins(shingles, params.seed, k, out);
  const SignPath path = detail::CurrentSignPath();
  if (!shingles.empty() && k <= kWideMaxSlots && path != SignPath::kScalar) {
#if PREFSIFT_SIGN_X86
    if (path == SignPath::kAvx512) {
      DensifyAvx512(out, k, params.seed, compact);
    } else {
      DensifyAvx2(out, k, params.seed, compact);
    }
    return;
#endif
  }
  DensifyScalar(out, k, params.seed);
  if (compact != nullptr) Compact(std::span<const uint64_t>(out, k), std::span<uint8_t>(compact, k));
}

}  // namespace

namespace detail {

bool SignPathAvailable(SignPath path) { return path <= BestSignPath(); }

SignPath CurrentSignPath() {
  const int forced = forced_path.load(std::memory_order_relaxed);
  return forced < 0 ? BestSignPath() : static_cast<SignPath>(forced);
}

void ForceSignPath(SignPath path) { forced_path.store(static_cast<int>(path), std::memory_order_relaxed); }

void ResetSignPath() { forced_path.store(-1, std::memory_order_relaxed); }

}  // namespace detail

void Sign(std::span<const uint64_t> shingles, const MinHashParams& params,
          std::span<uint64_t> out) {
  SignInto(shingles, params, out.data(), nullptr);
}

void SignCompact(std::span<const uint64_t> shingles, const MinHashParams& params,
                 std::span<uint8_t> out) {
  thread_local std::vector<uint64_t> full;
  full.resize(params.num_slots);
  SignInto(shingles, params, full.data(), out.data());
}

void SignReference(std::span<const uint64_t> shingles, const MinHashParams& params,
                   std::span<uint64_t> out) {
  const uint32_t k = params.num_slots;
  std::fill(out.begin(), out.end(), kEmpty);
  const uint64_t seed_mix = Mix(params.seed);
  for (uint64_t h : shingles) {
    uint64_t x = Mix(h ^ seed_mix);
    if (x == kEmpty) --x;
    const uint32_t bin = Bin(x, k);
    if (x < out[bin]) out[bin] = x;
  }
  std::vector<bool> filled(k);
  for (uint32_t i = 0; i < k; ++i) filled[i] = out[i] != kEmpty;
  if (shingles.empty()) return;
  const uint64_t probe_seed = Mix(params.seed ^ kProbeSeedTweak);
  for (uint32_t i = 0; i < k; ++i) {
    if (filled[i]) continue;
    for (uint64_t attempt = 1;; ++attempt) {
      const uint32_t j = ProbeBin(probe_seed, i, attempt, k);
      if (filled[j]) {
        out[i] = out[j];
        break;
      }
    }
  }
}

std::vector<uint64_t> Sign(std::span<const uint64_t> shingles, const MinHashParams& params) {
  std::vector<uint64_t> out(params.num_slots);
  Sign(shingles, params, out);
  return out;
}

void Compact(std::span<const uint64_t> signature, std::span<uint8_t> out) {
  for (size_t i = 0; i < signature.size(); ++i) out[i] = static_cast<uint8_t>(signature[i]);
}

void SignTextCompact(std::string_view text, const ShingleOptions& shingle_options,
                     const MinHashParams& params, std::span<uint8_t> out) {
  thread_local std::vector<uint64_t> shingles;
  shingles.clear();
  AppendShingles(text, shingle_options, &shingles);
  SignCompact(shingles, params, out);
}

void SignTextsCompact(std::span<const std::string_view> texts,
                      const ShingleOptions& shingle_options, const MinHashParams& params,
                      uint32_t threads, std::span<uint8_t> out) {
  const size_t n = texts.size();
  const size_t k = params.num_slots;
  auto work = [&](size_t begin, size_t end) {
    for (size_t i = begin; i < end; ++i) {
      SignTextCompact(texts[i], shingle_options, params, out.subspan(i * k, k));
    }
  };
  threads = std::max<uint32_t>(threads, 1);
  if (threads == 1 || n < 2 * static_cast<size_t>(threads)) {
    work(0, n);
    return;
  }
  std::vector<std::thread> pool;
  const size_t chunk = (n + threads - 1) / threads;
  for (uint32_t t = 0; t < threads; ++t) {
    const size_t begin = std::min(n, t * chunk);
    pool.emplace_back(work, begin, std::min(n, begin + chunk));
  }
  for (auto& th : pool) th.join();
}

double EstimateJaccard(std::span<const uint64_t> a, std::span<const uint64_t> b) {
  size_t equal = 0;
  for (size_t i = 0; i < a.size(); ++i) equal += (a[i] == b[i]);
  return static_cast<double>(equal) / static_cast<double>(a.size());
}

uint32_t CountEqualSlots(std::span<const uint8_t> a, std::span<const uint8_t> b) {
  uint32_t equal = 0;
  const uint8_t* pa = a.data();
  const uint8_t* pb = b.data();
  for (size_t i = 0; i < a.size(); ++i) equal += static_cast<uint32_t>(pa[i] == pb[i]);
  return equal;
}

double CompactMatchesToJaccard(uint32_t equal_slots, uint32_t num_slots) {
  constexpr double kChance = 1.0 / 256.0;
  const double p = static_cast<double>(equal_slots) / static_cast<double>(num_slots);
  const double j = (p - kChance) / (1.0 - kChance);
  return std::clamp(j, 0.0, 1.0);
}

double EstimateJaccardCompact(std::span<const uint8_t> a, std::span<const uint8_t> b) {
  return CompactMatchesToJaccard(CountEqualSlots(a, b), static_cast<uint32_t>(a.size()));
}

}  // namespace prefsift::sketch
