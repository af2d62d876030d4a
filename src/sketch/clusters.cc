// Near-duplicate clustering; see clusters.h.
#include "sketch/clusters.h"

#include <algorithm>
#include <string>
#include <thread>

#include "sketch/minhash.h"
#include "sketch/set_similarity.h"
#include "sketch/union_find.h"

namespace prefsift::sketch {
namespace {

Status Validate(std::span<const uint8_t> signatures, uint32_t num_slots,
                const ClusterOptions& options) {
  if (num_slots == 0 || signatures.size() % num_slots != 0) {
    return Status::Usage("signature buffer is not a whole number of " +
                         std::to_string(num_slots) + "-slot signatures");
  }
  if (!(options.threshold > 0.0 && options.threshold <= 1.0)) {
    return Status::Usage("similarity threshold must be in (0, 1]");
  }
  if (signatures.size() / num_slots >= 0xffffffffULL) {
    return Status::Usage("too many records for one clustering");
  }
  return Status::Ok();
}

// Validate, and the pairs are sorted, distinct and a < b < N.
Status ValidatePairs(std::span<const uint8_t> signatures, uint32_t num_slots, std::span<const uint64_t> pairs,
                     const ClusterOptions& options) {
  if (Status st = Validate(signatures, num_slots, options); !st.ok()) return st;
  const auto n = static_cast<uint32_t>(signatures.size() / num_slots);
  for (size_t p = 0; p < pairs.size(); ++p) {
    if (PairFirst(pairs[p]) >= PairSecond(pairs[p]) || PairSecond(pairs[p]) >= n ||
        (p > 0 && pairs[p - 1] >= pairs[p])) {
      return Status::Usage("candidate pairs must be sorted, distinct, a < b < N");
    }
  }
  return Status::Ok();
}

Result<Banding> ResolveBanding(uint32_t num_slots, const ClusterOptions& options) {
  Banding banding = options.banding;
  if (banding.bands == 0 || banding.rows == 0) {
    auto chosen = ChooseBanding(num_slots, std::min(options.threshold, 0.999));
    if (!chosen.ok()) return chosen.status();
    banding = chosen.value();
  }
  if (static_cast<uint64_t>(banding.bands) * banding.rows > num_slots) {
    return Status::Usage("banding uses more slots than the signature has");
  }
  return banding;
}

// Verifies `pairs` with similarity(a, b) and clusters. SimFn: double(uint32_t, uint32_t).
template <typename SimFn>
Clustering VerifyAndCluster(uint32_t n, std::span<const uint64_t> pairs,
                            const ClusterOptions& options, const SimFn& similarity) {
  Clustering out;
  out.stats.candidates.unique_pairs = pairs.size();
  // Verify every distinct pair; contiguous chunks per thread.
  std::vector<float> sims(pairs.size());
  const uint32_t threads = std::max<uint32_t>(options.threads, 1);
  auto verify = [&](size_t begin, size_t end) {
    for (size_t p = begin; p < end; ++p) {
      sims[p] = static_cast<float>(similarity(PairFirst(pairs[p]), PairSecond(pairs[p])));
    }
  };
  if (threads == 1 || pairs.size() < 4096) {
    verify(0, pairs.size());
  } else {
    std::vector<std::thread> pool;
    const size_t chunk = (pairs.size() + threads - 1) / threads;
    for (uint32_t t = 0; t < threads; ++t) {
      const size_t begin = std::min(pairs.size(), t * chunk);
      const size_t end = std::min(pairs.size(), begin + chunk);
      pool.emplace_back(verify, begin, end);
    }
    for (auto& th : pool) th.join();
  }

  // Threshold compared in float, the precision the edges are reported in.
  const auto threshold = static_cast<float>(options.threshold);
  UnionFind uf(n);
  for (size_t p = 0; p < pairs.size(); ++p) {
    if (sims[p] >= threshold) {
      ++out.stats.verified_edges;
      uf.Union(PairFirst(pairs[p]), PairSecond(pairs[p]));
      if (options.keep_edges) out.edges.push_back({PairFirst(pairs[p]), PairSecond(pairs[p]), sims[p]});
    } else {
      ++out.stats.rejected_pairs;
    }
  }

  // Cluster id = smallest member: records are visited in index order, so the
  // first member seen of each root is the smallest.
  constexpr uint32_t kUnset = 0xffffffffu;
  std::vector<uint32_t> root_min(n, kUnset);
  out.cluster_of.resize(n);
  for (uint32_t i = 0; i < n; ++i) {
    const uint32_t root = uf.Find(i);
    if (root_min[root] == kUnset) root_min[root] = i;
    out.cluster_of[i] = root_min[root];
  }
  // Summaries for clusters of size >= 2, ordered by id.
  std::vector<uint32_t> slot(n, kUnset);  // cluster id -> index in out.clusters
  for (uint32_t i = 0; i < n; ++i) {
    const uint32_t id = out.cluster_of[i];
    if (id == i) {
      if (uf.SetSize(i) >= 2) {
        slot[i] = static_cast<uint32_t>(out.clusters.size());
        out.clusters.push_back({i, uf.SetSize(i), 1.0f, 0.0f});
      }
    }
  }
  for (size_t p = 0; p < pairs.size(); ++p) {
    if (sims[p] < threshold) continue;
    ClusterSummary& c = out.clusters[slot[out.cluster_of[PairFirst(pairs[p])]]];
    c.min_similarity = std::min(c.min_similarity, sims[p]);
    c.max_similarity = std::max(c.max_similarity, sims[p]);
  }
  return out;
}

// Candidates from the bands, then VerifyAndCluster.
template <typename SimFn>
Result<Clustering> Cluster(std::span<const uint8_t> signatures, uint32_t num_slots,
                           const ClusterOptions& options, const SimFn& similarity) {
  if (Status st = Validate(signatures, num_slots, options); !st.ok()) return st;
  auto banding = ResolveBanding(num_slots, options);
  if (!banding.ok()) return banding.status();
  CandidateStats cand_stats;
  const std::vector<uint64_t> pairs =
      CandidatePairs(signatures, num_slots, banding.value(), options.band_seed,
                     CandidateOptions{options.max_run, options.threads}, &cand_stats);
  Clustering out = VerifyAndCluster(static_cast<uint32_t>(signatures.size() / num_slots), pairs,
                                    options, similarity);
  out.stats.banding = banding.value();
  out.stats.candidates = cand_stats;
  return out;
}

// Estimated Jaccard from compact signatures.
auto CompactSimilarity(std::span<const uint8_t> signatures, uint32_t num_slots) {
  return [signatures, num_slots](uint32_t a, uint32_t b) {
    return CompactMatchesToJaccard(
        CountEqualSlots(signatures.subspan(static_cast<size_t>(a) * num_slots, num_slots),
                        signatures.subspan(static_cast<size_t>(b) * num_slots, num_slots)),
        num_slots);
  };
}

}  // namespace

Result<Clustering> ClusterCompactSignatures(std::span<const uint8_t> signatures,
                                            uint32_t num_slots, const ClusterOptions& options) {
  return Cluster(signatures, num_slots, options, CompactSimilarity(signatures, num_slots));
}

Result<Clustering> ClusterCandidates(std::span<const uint8_t> signatures, uint32_t num_slots,
                                     std::span<const uint64_t> pairs,
                                     const ClusterOptions& options) {
  if (Status st = ValidatePairs(signatures, num_slots, pairs, options); !st.ok()) return st;
  const auto n = static_cast<uint32_t>(signatures.size() / num_slots);
  return VerifyAndCluster(n, pairs, options, CompactSimilarity(signatures, num_slots));
}

Result<Clustering> ClusterCandidatesWithExactSets(std::span<const uint8_t> signatures, uint32_t num_slots,
                                                  std::span<const uint64_t> pairs,
                                                  std::span<const std::vector<uint64_t>> sets,
                                                  const ClusterOptions& options) {
  if (num_slots == 0 || sets.size() * num_slots != signatures.size()) {
    return Status::Usage("need one shingle set per signature");
  }
  if (Status st = ValidatePairs(signatures, num_slots, pairs, options); !st.ok()) return st;
  auto sim = [&](uint32_t a, uint32_t b) { return ExactJaccard(sets[a], sets[b]); };
  return VerifyAndCluster(static_cast<uint32_t>(sets.size()), pairs, options, sim);
}

Result<Clustering> ClusterWithExactSets(std::span<const uint8_t> signatures, uint32_t num_slots,
                                        std::span<const std::vector<uint64_t>> sets,
                                        const ClusterOptions& options) {
  if (num_slots == 0 || sets.size() * num_slots != signatures.size()) {
    return Status::Usage("need one shingle set per signature");
  }
  auto sim = [&](uint32_t a, uint32_t b) { return ExactJaccard(sets[a], sets[b]); };
  return Cluster(signatures, num_slots, options, sim);
}

}  // namespace prefsift::sketch
