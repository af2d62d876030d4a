// KeyFilter: a blocked Bloom filter over a set of 64-bit keys, two bytes a
// key, so that a key absent from a large table is turned away after one read
// of memory that mostly stays in cache.
//
// Why: the leakage check looks up every n-gram, band key and shingle of every
// training prompt, and almost all of them are absent. Without a filter each
// absent key reads a directory entry and a run of sorted keys, arrays of tens
// of MB, far larger than the cache (docs/leakage.md, "Absent keys").
//
// Layout: one 64-bit word per 4 keys (rounded up); a key sets 4 bits of one
// word. The word and the bits come from a remix of the key (the murmur3
// finaliser), not from its raw bits: SortedKeys' directory uses the top bits,
// and some tables hold keys that are not uniform (the prefix filter keeps
// each item's smallest hashes). About 0.5 % of absent keys pass (3.3 % at
// 8 keys a word, 1 byte a key, which measured slower: a key that passes costs
// the directory and key-run reads the filter is there to avoid).
// No false negatives: every key added sets its own bits, and bits are never
// cleared.
// Thread-safety: Build once on one thread; MayContain may then run concurrently.
#pragma once

#include <cstdint>
#include <span>
#include <vector>

#include "sketch/mix.h"

namespace prefsift {

class KeyFilter {
 public:
  // Replaces the contents with `keys` (any order, repeats allowed).
  void Build(std::span<const uint64_t> keys) {
    words_.assign(keys.empty() ? 0 : (keys.size() + kKeysPerWord - 1) / kKeysPerWord, 0);
    for (uint64_t k : keys) {
      const uint64_t h = sketch::Mix(k);
      words_[Word(h)] |= Mask(h);
    }
  }

  // False only when `key` is not among the keys built with (and always false
  // for an empty filter); true for every key built with.
  bool MayContain(uint64_t key) const {
    if (words_.empty()) return false;
    const uint64_t h = sketch::Mix(key);
    const uint64_t m = Mask(h);
    return (words_[Word(h)] & m) == m;
  }

  // Starts reading the word MayContain(key) will read (a hint, no effect on
  // any answer): a caller looking up many keys asks for the next ones' words
  // while it checks these, so the reads overlap instead of waiting in turn.
  void Prefetch(uint64_t key) const {
    if (!words_.empty()) __builtin_prefetch(words_.data() + Word(sketch::Mix(key)));
  }

  // Heap bytes held (capacity).
  uint64_t bytes() const { return words_.capacity() * 8; }

 private:
  static constexpr size_t kKeysPerWord = 4;

  // The word from the top bits (a multiply-shift range reduction, any word
  // count), the 4 bits from the low 24: disjoint bits of the mix.
  size_t Word(uint64_t h) const {
    __extension__ typedef unsigned __int128 U128;
    return static_cast<size_t>((static_cast<U128>(h) * words_.size()) >> 64);
  }
  static uint64_t Mask(uint64_t h) {
    return (uint64_t{1} << (h & 63)) | (uint64_t{1} << ((h >> 6) & 63)) | (uint64_t{1} << ((h >> 12) & 63)) |
           (uint64_t{1} << ((h >> 18) & 63));
  }

  std::vector<uint64_t> words_;
};

}  // namespace prefsift
