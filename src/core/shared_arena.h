// SharedArena: memory for many small values that live as long as their owner
// and are never freed one by one (per-record rows kept from pass 1 to the
// decide step). Values sit back to back in blocks of 1 MiB that never move,
// so a row costs its own bytes (rounded up to 8) and no heap block of its
// own: malloc's 16-byte chunk header and rounding are about half the size of
// the typical row (docs/performance.md, "Memory").
//
// Thread-safety: Allocate may be called from several threads at once (a
// mutex guards the block list; one lock a row); clear must not run
// concurrently with anything else.
#pragma once

#include <cstddef>
#include <cstdint>
#include <memory>
#include <mutex>
#include <vector>

namespace prefsift {

class SharedArena {
 public:
  // `bytes` bytes, 8-byte aligned, valid until clear() or destruction (at
  // least one word, so that even a request of 0 bytes gets a place of its own).
  void* Allocate(size_t bytes) {
    const size_t words = bytes == 0 ? 1 : (bytes + 7) / 8;
    std::lock_guard<std::mutex> lock(mu_);
    if (words > kBlockWords) {  // longer than a block: a block of its own
      large_.push_back(std::make_unique_for_overwrite<uint64_t[]>(words));
      large_words_ += words;
      return large_.back().get();
    }
    if (words > kBlockWords - used_) {
      blocks_.push_back(std::make_unique_for_overwrite<uint64_t[]>(kBlockWords));
      used_ = 0;
    }
    void* at = blocks_.back().get() + used_;
    used_ += words;
    return at;
  }

  // Frees every block.
  void clear() {
    std::vector<std::unique_ptr<uint64_t[]>>().swap(blocks_);
    std::vector<std::unique_ptr<uint64_t[]>>().swap(large_);
    used_ = kBlockWords;
    large_words_ = 0;
  }

  // Bytes held.
  size_t bytes() const { return (blocks_.size() * kBlockWords + large_words_) * sizeof(uint64_t); }

 private:
  static constexpr size_t kBlockWords = size_t{1} << 17;  // 1 MiB

  std::mutex mu_;
  std::vector<std::unique_ptr<uint64_t[]>> blocks_;
  std::vector<std::unique_ptr<uint64_t[]>> large_;
  size_t large_words_ = 0;
  size_t used_ = kBlockWords;  // words used of the last block (kBlockWords: no block yet)
};

}  // namespace prefsift
