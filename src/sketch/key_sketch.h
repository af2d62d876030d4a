// Bottom-m key sketches of shingle sets, and candidate pairs from them that
// set template text aside.
//
// A record's key sketch is the m smallest distinct 32-bit keys of its shingles
// (key = high 32 bits of a seeded 64-bit mix of the shingle hash): a bottom-k
// sketch (Cohen & Kaplan 2007, "Summarizing data using bottom-k sketches",
// PODC). It is made in pass 1, one record at a time, before any document
// frequency is known. Two sets with Jaccard J share about m J of their
// sketches' keys (the keys of the bottom m of their union that lie in both).
//
// Candidate pairs (KeySketchPairs), once every sketch is known:
//   * A key held by at least `min_records` sketches is template text (a stock
//     greeting, header or footer shared by many prompts) and is set aside; any
//     other key is informative. Two records are a candidate pair when they
//     share at least one informative key and at least `min_shared_share` of
//     the informative keys of the one holding fewer (a near duplicate shares
//     most of them; two prompts that only share a slot value or a rare phrase
//     share one of many). A key run has fewer than min_records members, so a
//     record is looked at in at most m (min_records - 1) pairs: the work grows
//     with the records, not with their square.
//   * Records holding fewer than `chain_below_share` of m informative keys
//     (copies of one popular prompt, whose keys are all set aside, and prompts
//     that are nearly all stock sentences) are linked by sorted
//     neighbourhoods: each joins the runs of its `chain_keys` smallest
//     set-aside keys; in a run the members are ordered by their whole sketch
//     (lexicographically, then by record) and each is paired with the one
//     before it. Copies share their sketches, edited copies long prefixes of
//     them. At most chain_keys pairs a record.
// The pairs are only candidates; the caller verifies each with its own
// similarity (e.g. the whole-set MinHash estimate).
//
// Thread-safety: pure functions; KeySketchPairs uses up to options.threads
// std::threads and returns the same result for any thread count.
#pragma once

#include <cstdint>
#include <span>
#include <vector>

namespace prefsift::sketch {

// Marks an unused place of a sketch (a set with fewer than m distinct keys).
inline constexpr uint32_t kNoKey = 0xffffffffu;

// The out.size() smallest distinct keys of `shingles` (order and repeats do
// not matter), ascending; places beyond the number of distinct keys get
// kNoKey. A key equal to kNoKey (chance 2^-32 a shingle) is left out.
void KeySketch(std::span<const uint64_t> shingles, uint64_t seed, std::span<uint32_t> out);

struct KeyPairOptions {
  uint32_t min_records = 10;  // a key in at least this many sketches is set aside
  uint32_t chain_keys = 3;    // set-aside keys per record that link by sorted neighbourhood
  double min_shared_share = 0.34;  // of the smaller record's informative keys a pair must share
  uint32_t chain_window = 2;  // a member of a run is paired with this many before it
  double chain_below_share = 0.25;  // records with fewer informative keys than this share of m join neighbourhoods
  uint32_t threads = 1;
  // When no key is set aside: return no pair at all (stats hold the key
  // counts only), for a caller that then takes candidates another way.
  bool only_with_template = false;
};

struct KeyPairStats {
  uint64_t keys = 0;                // distinct keys over all sketches
  uint64_t keys_set_aside = 0;      // distinct keys held by >= min_records sketches
  uint64_t entries_set_aside = 0;   // places holding a set-aside key
  uint64_t records_without_informative = 0;  // records whose keys are all set aside (or none)
  uint64_t informative_pairs = 0;   // distinct pairs sharing enough informative keys
  uint64_t pairs_below_share = 0;   // distinct pairs sharing informative keys, but too few
  uint64_t chain_pairs = 0;         // distinct pairs from sorted neighbourhoods
  uint64_t unique_pairs = 0;        // distinct pairs returned (the union)
  uint32_t largest_run = 0;         // largest run of an informative key
};

// Candidate pairs (packed as lsh.h's PackPair, sorted ascending, distinct) of
// N records whose sketches are stored back to back (N * m keys, each sketch
// ascending as KeySketch writes it). REQUIRES: keys.size() % m == 0, m >= 1,
// N * m < 2^32.
std::vector<uint64_t> KeySketchPairs(std::span<const uint32_t> keys, uint32_t m,
                                     const KeyPairOptions& options, KeyPairStats* stats);

}  // namespace prefsift::sketch
