// LSH banding and candidate pairs; see lsh.h.
#include "sketch/lsh.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <string>
#include <thread>

#include "sketch/radix_sort.h"

#define XXH_INLINE_ALL
#include <xxhash.h>

namespace prefsift::sketch {
namespace {

struct Accumulated {
  std::vector<uint64_t> pairs;  // sorted, distinct
  CandidateStats stats;
};

void MergeInto(std::vector<uint64_t>* acc, std::vector<uint64_t>* add, std::vector<uint64_t>* tmp) {
  tmp->clear();
  tmp->reserve(acc->size() + add->size());
  std::set_union(acc->begin(), acc->end(), add->begin(), add->end(), std::back_inserter(*tmp));
  acc->swap(*tmp);
}

// Emits the pairs of one band from `buf` (bucket << 32 | index, sorted).
void EmitRuns(const std::vector<uint64_t>& buf, uint32_t max_run, std::vector<uint64_t>* out,
              CandidateStats* stats) {
  const size_t n = buf.size();
  size_t s = 0;
  while (s < n) {
    const uint64_t bucket = buf[s] >> 32;
    size_t e = s + 1;
    while (e < n && (buf[e] >> 32) == bucket) ++e;
    const size_t m = e - s;
    if (m >= 2) {
      stats->largest_run = std::max<uint32_t>(stats->largest_run, static_cast<uint32_t>(m));
      if (m <= max_run) {
        for (size_t x = s; x < e; ++x) {
          for (size_t y = x + 1; y < e; ++y) {
            out->push_back(PackPair(static_cast<uint32_t>(buf[x]), static_cast<uint32_t>(buf[y])));
          }
        }
      } else {
        ++stats->capped_runs;
        stats->capped_run_items += m;
        const auto first = static_cast<uint32_t>(buf[s]);
        for (size_t y = s + 1; y < e; ++y) {
          out->push_back(PackPair(first, static_cast<uint32_t>(buf[y])));
          if (y - 1 > s) {
            out->push_back(PackPair(static_cast<uint32_t>(buf[y - 1]), static_cast<uint32_t>(buf[y])));
          }
        }
      }
    }
    s = e;
  }
}


// KeyFn: uint64_t(uint32_t record, uint32_t band).
template <typename KeyFn>
std::vector<uint64_t> Generate(uint32_t n, uint32_t bands, const KeyFn& key,
                               const CandidateOptions& options, CandidateStats* stats) {
  const uint32_t threads = std::clamp<uint32_t>(options.threads, 1, std::max<uint32_t>(bands, 1));
  std::vector<Accumulated> acc(threads);
  auto work = [&](uint32_t t) {
    std::vector<uint64_t> buf(n);
    std::vector<uint64_t> band_pairs;
    std::vector<uint64_t> tmp;
    Accumulated& mine = acc[t];
    for (uint32_t band = t; band < bands; band += threads) {
      for (uint32_t i = 0; i < n; ++i) {
        buf[i] = (key(i, band) & 0xffffffff00000000ULL) | i;
      }
      SortWords(buf);
      band_pairs.clear();
      EmitRuns(buf, std::max<uint32_t>(options.max_run, 2), &band_pairs, &mine.stats);
      mine.stats.bucket_pairs += band_pairs.size();
      std::sort(band_pairs.begin(), band_pairs.end());
      band_pairs.erase(std::unique(band_pairs.begin(), band_pairs.end()), band_pairs.end());
      MergeInto(&mine.pairs, &band_pairs, &tmp);
    }
  };
  if (threads == 1) {
    work(0);
  } else {
    std::vector<std::thread> pool;
    for (uint32_t t = 0; t < threads; ++t) pool.emplace_back(work, t);
    for (auto& th : pool) th.join();
  }
  std::vector<uint64_t> pairs = std::move(acc[0].pairs);
  CandidateStats total = acc[0].stats;
  std::vector<uint64_t> tmp;
  for (uint32_t t = 1; t < threads; ++t) {
    MergeInto(&pairs, &acc[t].pairs, &tmp);
    total.bucket_pairs += acc[t].stats.bucket_pairs;
    total.capped_runs += acc[t].stats.capped_runs;
    total.capped_run_items += acc[t].stats.capped_run_items;
    total.largest_run = std::max(total.largest_run, acc[t].stats.largest_run);
  }
  total.unique_pairs = pairs.size();
  if (stats != nullptr) *stats = total;
  return pairs;
}

}  // namespace

double CandidateProbability(double s, Banding banding) {
  return 1.0 - std::pow(1.0 - std::pow(s, banding.rows), banding.bands);
}

double ApproxThreshold(Banding banding) {
  return std::pow(1.0 / banding.bands, 1.0 / banding.rows);
}

Result<Banding> ChooseBanding(uint32_t num_slots, double threshold, double min_probability) {
  if (num_slots == 0) return Status::Usage("MinHash needs at least one slot");
  if (!(threshold > 0.0 && threshold < 1.0)) {
    return Status::Usage("similarity threshold must be in (0, 1), got " + std::to_string(threshold));
  }
  if (!(min_probability > 0.0 && min_probability < 1.0)) {
    return Status::Usage("candidate probability target must be in (0, 1)");
  }
  constexpr int kSteps = 400;  // Simpson's rule on [0, threshold]
  const double h = threshold / kSteps;
  Banding best;
  double best_area = 0.0;
  for (uint32_t b = 1; b <= num_slots; ++b) {
    for (uint32_t r = 1; b * r <= num_slots; ++r) {
      const Banding cand{b, r};
      if (CandidateProbability(threshold, cand) < min_probability) continue;
      double area = CandidateProbability(0.0, cand) + CandidateProbability(threshold, cand);
      for (int k = 1; k < kSteps; ++k) {
        area += (k % 2 == 1 ? 4.0 : 2.0) * CandidateProbability(k * h, cand);
      }
      area *= h / 3.0;
      const bool better = best.bands == 0 || area < best_area - 1e-12 ||
                          (std::fabs(area - best_area) <= 1e-12 && b * r < best.bands * best.rows);
      if (better) {
        best = cand;
        best_area = area;
      }
    }
  }
  if (best.bands == 0) return Status::Usage("no banding reaches the candidate probability target");
  return best;
}

uint64_t BandKey(std::span<const uint8_t> signature, uint32_t band, uint32_t rows, uint64_t seed) {
  return XXH3_64bits_withSeed(signature.data() + static_cast<size_t>(band) * rows, rows,
                              seed + band);
}

void BandKeys(std::span<const uint8_t> signature, Banding banding, uint64_t seed,
              std::span<uint64_t> out) {
  for (uint32_t band = 0; band < banding.bands; ++band) {
    out[band] = BandKey(signature, band, banding.rows, seed);
  }
}

std::vector<uint64_t> CandidatePairs(std::span<const uint8_t> signatures, uint32_t num_slots,
                                     Banding banding, uint64_t band_seed,
                                     const CandidateOptions& options, CandidateStats* stats) {
  const auto n = static_cast<uint32_t>(signatures.size() / num_slots);
  auto key = [&](uint32_t i, uint32_t band) {
    return BandKey(signatures.subspan(static_cast<size_t>(i) * num_slots, num_slots), band,
                   banding.rows, band_seed);
  };
  return Generate(n, banding.bands, key, options, stats);
}

std::vector<uint64_t> CandidatePairsFromBandKeys(std::span<const uint64_t> keys, uint32_t bands,
                                                 const CandidateOptions& options,
                                                 CandidateStats* stats) {
  const auto n = static_cast<uint32_t>(keys.size() / bands);
  auto key = [&](uint32_t i, uint32_t band) { return keys[static_cast<size_t>(i) * bands + band]; };
  return Generate(n, bands, key, options, stats);
}

}  // namespace prefsift::sketch
