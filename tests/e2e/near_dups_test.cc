// End-to-end scoring of the near-duplicate stage on the demo samples against
// samples/truth.json "near_duplicates" (planted clusters with their word
// 5-gram Jaccard computed by the generator in Python, and distinct pairs on the
// same topic with Jaccard below 0.3).
//
// A planted pair whose member was rejected by an earlier stage (ingest or
// exact) never reaches the near stage; such pairs are skipped and counted
// (printed), not failed. Malformed lines appear in no other truth list
// (samples/README.md), so in practice only exact-duplicate rejects could cause
// a skip.
#include <gtest/gtest.h>

#include <iostream>
#include <map>
#include <set>

#include "e2e/e2e_helpers.h"

namespace prefsift::e2e {
namespace {

using Json = nlohmann::ordered_json;

// Record id -> cluster id, from clusters.jsonl of the demo run.
const std::map<std::string, int64_t>& ClusterOf() {
  static const std::map<std::string, int64_t> m = [] {
    std::map<std::string, int64_t> out;
    for (const auto& c : ReadJsonl(DemoOutput() + "/clusters.jsonl")) {
      for (const auto& id : c["members"]) out[id.get<std::string>()] = c["cluster"].get<int64_t>();
    }
    return out;
  }();
  return m;
}

// True when the record was rejected before the near stage ran.
bool RejectedEarlier(const std::string& id) {
  const auto& rejects = DemoRejectsById();
  auto it = rejects.find(id);
  return it != rejects.end() && it->second["stage"] != "near" &&
         (it->second["stage"] == "ingest" || it->second["stage"] == "exact");
}

TEST(NearDupsE2E, EveryPlantedPairEndsInOneCluster) {
  const Json& nd = Truth()["near_duplicates"];
  ASSERT_EQ(nd["shingle"], "word 5-gram");
  const auto& cluster_of = ClusterOf();
  int checked = 0, skipped = 0, estimate_misses = 0;
  for (const auto& c : nd["clusters"]) {
    for (const auto& p : c["pairs"]) {
      std::string a = p["a"]["id"], b = p["b"]["id"];
      if (RejectedEarlier(a) || RejectedEarlier(b)) {
        ++skipped;
        std::cout << "skipped planted pair " << a << " / " << b << ": a member was rejected before the near stage\n";
        continue;
      }
      ++checked;
      auto ia = cluster_of.find(a), ib = cluster_of.find(b);
      const bool together = ia != cluster_of.end() && ib != cluster_of.end() && ia->second == ib->second;
      // The stage verifies with the MinHash estimate (K = 128): its standard
      // error is sqrt(J(1-J)/K) (Broder 1997), 0.03 at J = 0.85, so a pair a
      // little above the 0.8 threshold can be estimated below it. Pairs at
      // J >= 0.9 must always end in one cluster; below that a few misses are
      // allowed and counted. (Which pairs miss moved when words began to
      // split at punctuation, UAX #29: the shingle hashes changed.)
      if (p["jaccard"].get<double>() >= 0.9) {
        EXPECT_TRUE(together) << a << " / " << b << " (Jaccard " << p["jaccard"] << ") not in one cluster";
      } else if (!together) {
        ++estimate_misses;
        std::cout << "missed by the estimate: " << a << " / " << b << " (Jaccard " << p["jaccard"] << ")\n";
      }
    }
  }
  std::cout << "planted near-duplicate pairs checked: " << checked << ", skipped: " << skipped << "\n";
  EXPECT_EQ(checked + skipped, 110);  // samples/README.md: 80 clusters, 110 pairs
  EXPECT_GE(checked, 100);
  EXPECT_LE(estimate_misses, 3);  // 2 on the current samples (lh-000436 with two copies at 0.85 and 0.83)
}

TEST(NearDupsE2E, NoPlantedDistinctPairIsMerged) {
  const Json& nd = Truth()["near_duplicates"];
  const auto& cluster_of = ClusterOf();
  int pairs = 0;
  for (const auto& p : nd["distinct_same_topic_pairs"]) {
    ++pairs;
    std::string a = p["a"]["id"], b = p["b"]["id"];
    auto ia = cluster_of.find(a), ib = cluster_of.find(b);
    if (ia == cluster_of.end() || ib == cluster_of.end()) continue;
    EXPECT_NE(ia->second, ib->second) << a << " / " << b << " (Jaccard " << p["jaccard"] << ") were merged";
  }
  EXPECT_EQ(pairs, 40);
}

TEST(NearDupsE2E, SummaryAndClusterFileAgree) {
  const Json& s = DemoSummary()["stages"]["near"];
  ASSERT_TRUE(s.is_object());
  auto clusters = ReadJsonl(DemoOutput() + "/clusters.jsonl");
  EXPECT_EQ(s["clusters"].get<size_t>(), clusters.size());
  uint64_t in_clusters = 0, largest = 0;
  std::map<std::string, uint64_t> hist;
  std::set<std::string> seen;
  for (const auto& c : clusters) {
    uint64_t n = c["members"].size();
    EXPECT_EQ(c["size"].get<uint64_t>(), n);
    EXPECT_GE(n, 2u);
    in_clusters += n;
    largest = std::max(largest, n);
    ++hist[std::to_string(n)];
    EXPECT_LE(c["min_similarity"].get<double>(), c["max_similarity"].get<double>());
    EXPECT_GE(c["min_similarity"].get<double>(), s["settings"]["threshold"].get<double>() - 1e-6);
    for (const auto& id : c["members"]) EXPECT_TRUE(seen.insert(id.get<std::string>()).second) << id;
    // Members are never records rejected before the near stage.
    for (const auto& id : c["members"]) EXPECT_FALSE(RejectedEarlier(id.get<std::string>())) << id;
  }
  EXPECT_EQ(s["records_in_clusters"].get<uint64_t>(), in_clusters);
  EXPECT_EQ(s["largest_cluster"].get<uint64_t>(), largest);
  for (const auto& [size, count] : hist) EXPECT_EQ(s["cluster_sizes"][size].get<uint64_t>(), count) << size;
  // Every planted cluster is found, so there are at least 80 clusters.
  EXPECT_GE(clusters.size(), 80u);
  EXPECT_EQ(s["s_curve"].size(), 9u);
  std::cout << "demo: " << s["records_compared"] << " records compared, " << s["candidate_pairs"]
            << " candidate pairs, " << s["verified_pairs"] << " verified, " << clusters.size() << " clusters\n";
}

}  // namespace
}  // namespace prefsift::e2e
