// CandidateFacts (the facts of one candidate) and CandidateStore, where a run
// keeps every record's: blocks that never move, so each RecordFacts views its
// own candidates (RecordFacts::cands) without a vector or a heap block of its
// own. A record of B candidates costs 32 B bytes here and 16 in RecordFacts,
// for any B (docs/performance.md, "Memory").
//
// Thread-safety: Keep is not thread-safe (the pipeline calls it in input
// order); the facts it returns may be read from any thread.
#pragma once

#include <algorithm>
#include <cstdint>
#include <memory>
#include <span>
#include <vector>

#include "core/hash.h"

namespace prefsift {

// The facts of one candidate: 32 bytes.
struct CandidateFacts {
  Hash128 hash;         // of the normalised text
  uint32_t chars = 0;   // code points
  uint32_t words = 0;   // whitespace-separated words (stages/facts.h CountWords)
  int32_t rank = 0;     // dense rank, 1 = best
};

class CandidateStore {
 public:
  // A copy of `facts`, contiguous, valid for the store's life.
  std::span<const CandidateFacts> Keep(std::span<const CandidateFacts> facts) {
    if (facts.empty()) return {};
    CandidateFacts* at;
    if (facts.size() > kBlock) {  // more candidates than a block holds: a block of its own
      large_.push_back(std::make_unique<CandidateFacts[]>(facts.size()));
      at = large_.back().get();
    } else {
      if (facts.size() > kBlock - used_) {
        blocks_.push_back(std::make_unique<CandidateFacts[]>(kBlock));
        used_ = 0;
      }
      at = blocks_.back().get() + used_;
      used_ += facts.size();
    }
    std::copy(facts.begin(), facts.end(), at);
    return {at, facts.size()};
  }

 private:
  static constexpr size_t kBlock = size_t{1} << 15;  // 1 MiB a block
  std::vector<std::unique_ptr<CandidateFacts[]>> blocks_, large_;
  size_t used_ = kBlock;  // taken in the last block (full: none yet)
};

}  // namespace prefsift
