// Position bias: where the chosen candidate sits (docs/bias.md section 1-2).
//
// Statistics over a set of records: the distribution of the chosen slot per
// B (exact two-sided binomial test against 1/2 for B = 2, chi-square goodness
// of fit against 1/B for B > 2), the same per annotator and per source with a
// multiple-testing correction per family, and for ranking layouts the
// Spearman correlation between slot and rank. Pairwise layouts have no slot
// and records with a tied top have no chosen slot: both are counted apart.
//
// Rebalancing: a deterministic permutation per record such that, within each
// B, the chosen slot counts differ by at most one.
//
// Pure functions over the RunState; thread-safe for concurrent readers.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <cstdint>
#include <string>
#include <vector>

#include "stages/bias/bias_common.h"
#include "core/run_state.h"

namespace prefsift::bias {

struct PositionOptions {
  Correction correction = Correction::kHolm;
  double alpha = 0.05;               // significance level for the adjusted p-values
  uint64_t min_group_records = 10;   // smaller annotator/source groups are listed but not tested
};

// One test of "the chosen slot is uniform" on one group of records of equal B.
struct SlotTest {
  std::string group;               // annotator or source value ("" for overall)
  uint32_t b = 0;
  uint64_t n = 0;
  std::vector<uint64_t> counts;    // chosen-slot counts, slot 0..b-1
  bool tested = false;             // n >= min_group_records (always true overall when n > 0)
  double statistic = 0.0;          // chi-square statistic (B > 2) or share of slot 0 (B = 2)
  double p = 1.0, p_adjusted = 1.0;
  bool significant = false;        // p_adjusted <= alpha
};

struct PositionStats {
  uint64_t records = 0;            // records looked at
  uint64_t pairwise_excluded = 0;  // no slot (chosen/rejected fields)
  uint64_t tied_top_excluded = 0;  // top tied, no single chosen slot
  uint64_t with_slot = 0;          // counted in the slot statistics
  std::vector<SlotTest> overall;   // one per B, family "overall"
  std::vector<SlotTest> by_annotator, by_source;  // each its own family
  uint64_t annotator_groups_untested = 0, source_groups_untested = 0;
  // Ranking layouts (ranks/order): Spearman between slot and rank over all
  // candidates of those records.
  uint64_t ranking_records = 0, ranking_candidates = 0;
  double slot_rank_rho = 0.0, slot_rank_p = 1.0;
  bool slot_rank_defined = false;
};

// `new_slot_of[r]` (optional, may be null or shorter than the records):
// for record r, the slot each original candidate index moves to; an empty
// entry means unchanged. REQUIRES: records index st.records.
PositionStats ComputePositionStats(const RunState& st, const std::vector<size_t>& records,
                                   const std::vector<std::vector<uint32_t>>* new_slot_of,
                                   const PositionOptions& options);

void PositionStatsToJson(const PositionStats& s, const PositionOptions& options, nlohmann::ordered_json* out);

// The balanced assignment. Records with a single chosen candidate and a slot
// layout are grouped by B; within a group they are sorted by
// SeededHash(seed, "position", id) (ties by record index) and given target
// slots 0, 1, ..., B-1, 0, 1, ... round-robin, so target counts differ by at
// most one. Each record's permutation moves its chosen candidate to its
// target slot and fills the other slots with the remaining candidates in an
// order shuffled by a splitmix64 stream seeded from the same hash.
// Returns a vector sized st.records.size(); entry r is empty when record r is
// not in `records`, has no slot, or has a tied top; otherwise new_slot_of
// (a permutation of 0..B-1, possibly the identity).
std::vector<std::vector<uint32_t>> AssignBalancedSlots(const RunState& st, const std::vector<size_t>& records,
                                                       uint64_t seed);

}  // namespace prefsift::bias
