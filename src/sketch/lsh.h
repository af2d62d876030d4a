// LSH banding over compact MinHash signatures, and candidate-pair generation.
//
// Banding (Leskovec, Rajaraman & Ullman, Mining of Massive Datasets, sec.
// 3.4.2): the K slots are cut into b bands of r rows; two records become a
// candidate pair if all r rows of at least one band agree. For Jaccard s the
// probability is 1 - (1 - s^r)^b (an S-curve with its steep part near
// (1/b)^(1/r)). With compact (8-bit) slots a row agrees with probability
// s + (1 - s)/256, which moves the curve by less than 0.4% of a row.
//
// Candidate generation sorts, per band, one 8-byte word per record (top 32
// bits of the 64-bit band key, record index) and pairs the members of each run
// of equal keys. Chance collisions of the 32-bit bucket key only add pairs
// that verification rejects. A run longer than max_run (one huge bucket, e.g.
// thousands of copies of a template prompt) is not expanded into all m(m-1)/2
// pairs: each member is paired with the run's first member and with its
// predecessor (2m pairs), which still links exact and near copies into one
// component; such runs are counted in CandidateStats.
//
// Thread-safety: pure functions; CandidatePairs* use up to options.threads
// std::threads internally and return the same result for any thread count.
#pragma once

#include <cstdint>
#include <span>
#include <vector>

#include "core/status.h"

namespace prefsift::sketch {

struct Banding {
  uint32_t bands = 0;
  uint32_t rows = 0;
};

// 1 - (1 - s^r)^b. REQUIRES: 0 <= s <= 1, bands, rows >= 1.
double CandidateProbability(double s, Banding banding);

// (1/b)^(1/r): the similarity where the S-curve is steepest, approximately.
double ApproxThreshold(Banding banding);

// Picks (b, r) with b*r <= num_slots such that a pair at `threshold` becomes a
// candidate with probability >= min_probability, and among those the one with
// the smallest false-positive area (integral of the S-curve over [0,
// threshold]); ties go to fewer slots used. Errors if the arguments are out of
// range. For K = 256, threshold 0.8, 0.99 this gives b = 26, r = 8.
Result<Banding> ChooseBanding(uint32_t num_slots, double threshold,
                              double min_probability = 0.99);

// 64-bit key of band `band` of a compact signature: XXH3 of its r bytes,
// seeded with seed + band index, so equal rows in different bands differ.
// REQUIRES: (band + 1) * rows <= signature.size().
uint64_t BandKey(std::span<const uint8_t> signature, uint32_t band, uint32_t rows,
                 uint64_t seed);

// All b band keys of one signature. REQUIRES: out.size() == banding.bands,
// bands * rows <= signature.size().
void BandKeys(std::span<const uint8_t> signature, Banding banding, uint64_t seed,
              std::span<uint64_t> out);

struct CandidateOptions {
  uint32_t max_run = 256;  // runs longer than this get 2m pairs, not m(m-1)/2
  uint32_t threads = 1;
};

struct CandidateStats {
  uint64_t bucket_pairs = 0;      // pairs emitted over all bands, repeats included
  uint64_t unique_pairs = 0;      // distinct pairs returned
  uint64_t capped_runs = 0;       // runs longer than max_run
  uint64_t capped_run_items = 0;  // records in those runs, summed over bands
  uint32_t largest_run = 0;       // longest run of equal bucket keys seen
};

// Packs a pair as (a << 32) | b. REQUIRES: a < b.
inline uint64_t PackPair(uint32_t a, uint32_t b) { return (static_cast<uint64_t>(a) << 32) | b; }
inline uint32_t PairFirst(uint64_t p) { return static_cast<uint32_t>(p >> 32); }
inline uint32_t PairSecond(uint64_t p) { return static_cast<uint32_t>(p); }

// Candidate pairs (packed, sorted ascending, distinct) of N records whose
// compact signatures are stored back to back (N * num_slots bytes). Band keys
// are computed one band at a time; transient memory is 8 bytes a record per
// thread plus the pairs. REQUIRES: signatures.size() % num_slots == 0,
// bands * rows <= num_slots, N < 2^32.
std::vector<uint64_t> CandidatePairs(std::span<const uint8_t> signatures, uint32_t num_slots,
                                     Banding banding, uint64_t band_seed,
                                     const CandidateOptions& options, CandidateStats* stats);

// Same from precomputed band keys, N * bands of them, record-major.
// REQUIRES: keys.size() % bands == 0.
std::vector<uint64_t> CandidatePairsFromBandKeys(std::span<const uint64_t> keys, uint32_t bands,
                                                 const CandidateOptions& options,
                                                 CandidateStats* stats);

}  // namespace prefsift::sketch
