// GramRows: the evaluation n-gram ids each training record holds, kept by the
// leakage stage from pass 1 until the training frequencies are known (the
// n-gram and answer findings are decided then). One row a record: its
// prompt's gram ids, its candidates' gram ids, and (candidate, end) pairs that
// cut the candidates' ids apart. Most records of template-heavy data hold a
// few ids, so the rows sit back to back in blocks of 1 MiB that never move
// (8 bytes a record for the row's address, 12 for its three counts, 4 an id;
// no heap block a record: two small heap blocks a record had cost about
// 60 bytes each in malloc's chunks; docs/leakage.md, "Memory").
//
// Thread-safety: Set may be called from several threads at once for
// different rows (the block list is guarded by a mutex); reserve, resize,
// Reset and clear must not run concurrently with anything else. Rows read
// while nothing writes.
#pragma once

#include <algorithm>
#include <cstddef>
#include <cstdint>
#include <memory>
#include <mutex>
#include <span>
#include <utility>
#include <vector>

namespace prefsift {

// A view of one record's row (empty when the record has none).
class GramRow {
 public:
  GramRow() = default;
  explicit GramRow(const uint32_t* data) : data_(data) {}
  std::span<const uint32_t> prompt() const { return Part(3, Count(0)); }
  std::span<const uint32_t> answer() const { return Part(3 + Count(0), Count(1)); }
  // The (candidate, end) pairs, flattened: end is an offset into answer().
  std::span<const uint32_t> ends() const { return Part(3 + Count(0) + Count(1), 2 * Count(2)); }
  size_t answer_count() const { return Count(2); }
  std::pair<uint32_t, uint32_t> answer_end(size_t k) const { return {ends()[2 * k], ends()[2 * k + 1]}; }

 private:
  uint32_t Count(int k) const { return data_ ? data_[k] : 0; }
  std::span<const uint32_t> Part(size_t at, size_t n) const {
    return n == 0 ? std::span<const uint32_t>() : std::span<const uint32_t>(data_ + at, n);
  }
  const uint32_t* data_ = nullptr;
};

class GramRows {
 public:
  void reserve(size_t n) { rows_.reserve(n); }
  void resize(size_t n) { rows_.resize(n, nullptr); }
  size_t size() const { return rows_.size(); }
  // Frees every row and the blocks.
  void clear() {
    std::vector<const uint32_t*>().swap(rows_);
    std::vector<std::unique_ptr<uint32_t[]>>().swap(blocks_);
    std::vector<std::unique_ptr<uint32_t[]>>().swap(large_);
    used_ = kBlock;
    large_values_ = 0;
  }

  bool Has(size_t i) const { return rows_[i] != nullptr; }
  GramRow operator[](size_t i) const { return GramRow(rows_[i]); }
  // Row i without the record's ids (their space is freed by clear()).
  void Reset(size_t i) { rows_[i] = nullptr; }

  // Stores row i: `ends` is the flattened (candidate, end) pairs (even size).
  // All three empty: the record has no row. REQUIRES: i < size().
  void Set(size_t i, std::span<const uint32_t> prompt, std::span<const uint32_t> answer,
           std::span<const uint32_t> ends) {
    if (prompt.empty() && answer.empty() && ends.empty()) {
      rows_[i] = nullptr;
      return;
    }
    const size_t n = 3 + prompt.size() + answer.size() + ends.size();
    uint32_t* at = Allocate(n);
    at[0] = static_cast<uint32_t>(prompt.size());
    at[1] = static_cast<uint32_t>(answer.size());
    at[2] = static_cast<uint32_t>(ends.size() / 2);
    uint32_t* p = std::copy(prompt.begin(), prompt.end(), at + 3);
    p = std::copy(answer.begin(), answer.end(), p);
    std::copy(ends.begin(), ends.begin() + static_cast<std::ptrdiff_t>(2 * (ends.size() / 2)), p);
    rows_[i] = at;
  }

  size_t bytes() const {
    return rows_.capacity() * sizeof(const uint32_t*) + (blocks_.size() * kBlock + large_values_) * sizeof(uint32_t);
  }

 private:
  static constexpr size_t kBlock = size_t{1} << 18;  // values a block (1 MiB)

  uint32_t* Allocate(size_t n) {
    std::lock_guard<std::mutex> lock(mu_);
    if (n > kBlock) {  // a row longer than a block: a block of its own
      large_.push_back(std::make_unique_for_overwrite<uint32_t[]>(n));
      large_values_ += n;
      return large_.back().get();
    }
    if (n > kBlock - used_) {
      blocks_.push_back(std::make_unique_for_overwrite<uint32_t[]>(kBlock));
      used_ = 0;
    }
    uint32_t* at = blocks_.back().get() + used_;
    used_ += n;
    return at;
  }

  std::vector<const uint32_t*> rows_;
  std::mutex mu_;
  std::vector<std::unique_ptr<uint32_t[]>> blocks_;
  std::vector<std::unique_ptr<uint32_t[]>> large_;  // rows longer than a block
  size_t large_values_ = 0;
  size_t used_ = kBlock;  // values used of the last block (kBlock: no block yet)
};

}  // namespace prefsift
