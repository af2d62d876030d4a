// Near-duplicate clusters from compact MinHash signatures.
//
// Pipeline: LSH candidate pairs (lsh.h) -> verification of each distinct pair
// (estimated Jaccard from the compact signatures, or exact Jaccard when the
// caller supplies shingle sets) -> union-find over verified edges.
// Cluster id of a record = smallest record index in its cluster, so the output
// does not depend on thread count or processing order.
//
// Memory (compact path): the caller's K bytes a record, plus 8 bytes a record
// per thread while bucketing, 8 bytes a record for union-find, 4 for the
// cluster ids, and 12 bytes per distinct candidate pair.
//
// Thread-safety: pure functions; up to options.threads std::threads are used
// internally, results are identical for any thread count.
#pragma once

#include <cstdint>
#include <span>
#include <vector>

#include "core/status.h"
#include "sketch/lsh.h"

namespace prefsift::sketch {

struct ClusterOptions {
  double threshold = 0.8;                      // verified edge: Jaccard >= threshold
  Banding banding{};                           // {0, 0}: ChooseBanding(K, threshold)
  uint64_t band_seed = 0x62616e6473ULL;        // "bands"
  uint32_t max_run = 256;                      // see CandidateOptions
  uint32_t threads = 1;
  bool keep_edges = false;                     // return the verified edges
};

struct Edge {
  uint32_t a = 0;  // a < b
  uint32_t b = 0;
  float similarity = 0;
};

struct ClusterSummary {
  uint32_t id = 0;    // smallest member index
  uint32_t size = 0;  // >= 2
  float min_similarity = 0;  // over verified edges inside the cluster
  float max_similarity = 0;
};

struct ClusterStats {
  Banding banding;
  CandidateStats candidates;
  uint64_t verified_edges = 0;  // candidate pairs at or above the threshold
  uint64_t rejected_pairs = 0;  // candidate pairs below it
};

struct Clustering {
  std::vector<uint32_t> cluster_of;        // per record; == own index if alone
  std::vector<ClusterSummary> clusters;    // clusters of size >= 2, by id
  std::vector<Edge> edges;                 // verified edges, if keep_edges
  ClusterStats stats;
};

// Clusters N records with compact signatures stored back to back.
// Errors (kUsage) on an inconsistent size, bad threshold or banding.
Result<Clustering> ClusterCompactSignatures(std::span<const uint8_t> signatures,
                                            uint32_t num_slots, const ClusterOptions& options);

// The second half of ClusterCompactSignatures: verifies the given candidate
// pairs (packed, sorted, distinct; e.g. from CandidatePairs) and clusters.
// stats.candidates is left zero apart from unique_pairs. options.banding and
// band_seed are not used.
Result<Clustering> ClusterCandidates(std::span<const uint8_t> signatures, uint32_t num_slots,
                                     std::span<const uint64_t> pairs,
                                     const ClusterOptions& options);

// ClusterCandidates with the pairs verified by exact Jaccard of the given
// shingle sets (sorted, duplicate-free; one per record).
Result<Clustering> ClusterCandidatesWithExactSets(std::span<const uint8_t> signatures, uint32_t num_slots,
                                                  std::span<const uint64_t> pairs,
                                                  std::span<const std::vector<uint64_t>> sets,
                                                  const ClusterOptions& options);

// As ClusterCompactSignatures, but candidate pairs are verified by exact Jaccard of the given
// shingle sets (sorted, duplicate-free; one per record).
Result<Clustering> ClusterWithExactSets(std::span<const uint8_t> signatures, uint32_t num_slots,
                                        std::span<const std::vector<uint64_t>> sets,
                                        const ClusterOptions& options);

}  // namespace prefsift::sketch
