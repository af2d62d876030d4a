// Length bias: is the chosen answer longer than the others (docs/bias.md
// section 3-4)?
//
// For each record with a single preferred candidate (pairwise layouts
// included) the chosen length is compared with the other candidate (B = 2) or
// with the mean length of the others (B > 2): longer, shorter or tied, and
// the ratio chosen / other. Statistics: the share of "chosen longer" among
// non-tied records and the sign test (in words and in characters), mean and
// median ratio, Spearman's rho between the length difference of a candidate
// pair and which of the two was preferred, the same per source and per
// annotator (multiple-testing correction per family), and histograms of the
// chosen and rejected lengths.
//
// Rebalancing: subsampling within bins of |log2 ratio| so that the
// chosen-longer share reaches a target.
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

enum class LengthUnit { kWords, kChars };
const char* LengthUnitName(LengthUnit u);

struct LengthOptions {
  Correction correction = Correction::kHolm;
  double alpha = 0.05;
  uint64_t min_group_records = 10;  // smaller groups are listed but not tested
};

// Direction of the chosen candidate's length against the other(s):
// +1 longer, -1 shorter, 0 equal (for B > 2: chosen * (B-1) vs the sum of the
// others, exact in integers). *ratio = chosen / other (other = the mean of the
// others), or -1 when the other length is 0. REQUIRES: PreferredIndex(f) >= 0.
int LengthDirection(const RecordFacts& f, LengthUnit unit, double* ratio);

struct SignCount {
  std::string group;
  uint64_t records = 0, longer = 0, shorter = 0, ties = 0;
  bool tested = false;
  double share_longer = 0.0;  // longer / (longer + shorter); 0.5 when both are 0
  double p = 1.0, p_adjusted = 1.0;
  bool significant = false;
  double mean_ratio = 0.0, median_ratio = 0.0;  // over records with a defined ratio
};

struct LengthStats {
  uint64_t records = 0, tied_top_excluded = 0, compared = 0;
  SignCount words, chars;          // overall, family "overall" (2 tests)
  uint64_t spearman_pairs = 0;     // candidate pairs with a preference between them
  double spearman_rho = 0.0, spearman_p = 1.0;
  bool spearman_defined = false;
  std::vector<SignCount> by_source, by_annotator;  // in words; each its own family
  uint64_t source_groups_untested = 0, annotator_groups_untested = 0;
  // Histograms (fixed bin edges, docs/bias.md): chosen and rejected lengths.
  std::vector<uint64_t> chosen_words_hist, rejected_words_hist, chosen_chars_hist, rejected_chars_hist;
};

// Pair orientation for the Spearman correlation is drawn from
// SeededHash(seed, "length-pairs", id) so it does not follow the file order.
LengthStats ComputeLengthStats(const RunState& st, const std::vector<size_t>& records, uint64_t seed,
                               const LengthOptions& options);
void LengthStatsToJson(const LengthStats& s, nlohmann::ordered_json* out);

// Upper edges of the histogram bins (the last bin is open).
const std::vector<uint32_t>& WordBinEdges();
const std::vector<uint32_t>& CharBinEdges();

struct LengthRebalanceOptions {
  double target = 0.5;       // chosen-longer share to reach
  double tolerance = 0.02;   // nothing is done when the share is within target +- tolerance
  LengthUnit unit = LengthUnit::kWords;
  // Upper edges of the |log2(chosen / other)| bins; the last bin is open.
  std::vector<double> bin_edges = {0.1, 0.25, 0.5, 1.0, 2.0};
  // Balance each source (RecordFacts::source_id; "" is a source too) on its own,
  // so a source that is already balanced loses nothing.
  bool by_source = true;
};

struct LengthRebalancePlan {
  bool applied = false;            // false when every stratum was already within tolerance
  uint64_t longer_before = 0, shorter_before = 0, longer_after = 0, shorter_after = 0;
  double share_before = 0.5, share_after = 0.5;
  struct Bin {
    uint64_t longer = 0, shorter = 0, longer_kept = 0, shorter_kept = 0;
  };
  std::vector<Bin> bins;            // summed over strata
  struct Stratum {
    std::string source;
    uint64_t longer = 0, shorter = 0, longer_kept = 0, shorter_kept = 0;
    bool rebalanced = false;
  };
  std::vector<Stratum> strata;     // by source name (one "" stratum when not by_source)
  struct Discard {
    size_t record;
    size_t bin;
    int direction;     // +1 chosen longer, -1 chosen shorter
    double ratio;      // chosen / other (-1 undefined)
  };
  std::vector<Discard> discard;    // in record order
};

// Strata: each source (by_source) or all records. A stratum whose share is
// within target +- tolerance is left alone. Otherwise, within each bin with `longer` chosen-longer and `shorter` chosen-shorter
// records, keeps min(longer, round(t * shorter / (1 - t))) longer ones when
// the bin's share is above the target t, else min(shorter, round((1 - t) *
// longer / t)) shorter ones; the records discarded are those with the largest
// SeededHash(seed, "length", id) (ties by record index). Tied lengths are
// never discarded. REQUIRES: 0 < target < 1, bin_edges ascending.
LengthRebalancePlan PlanLengthRebalance(const RunState& st, const std::vector<size_t>& records, uint64_t seed,
                                        const LengthRebalanceOptions& options);

}  // namespace prefsift::bias
