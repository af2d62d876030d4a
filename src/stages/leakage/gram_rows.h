// GramRows: the evaluation n-gram ids each training record holds, kept by the
// leakage stage from pass 1 until the training frequencies are known (the
// n-gram and answer findings are decided then). One row a record: its
// prompt's gram ids, its candidates' gram ids, and (candidate, end) pairs that
// cut the candidates' ids apart. Most records of template-heavy data hold a
// few ids, so the rows sit back to back in a SharedArena (8 bytes a record for
// the row's address, 12 for its three counts, 4 an id; no heap block a
// record: two small heap blocks a record had cost about 60 bytes each in
// malloc's chunks; docs/leakage.md, "Memory").
//
// Thread-safety: Set may be called from several threads at once for
// different rows (SharedArena::Allocate is); reserve, resize,
// Reset and clear must not run concurrently with anything else. Rows read
// while nothing writes.
#pragma once

#include <algorithm>
#include <cstddef>
#include <cstdint>
#include <span>
#include <utility>
#include <vector>

#include "core/shared_arena.h"

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
    arena_.clear();
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

  size_t bytes() const { return rows_.capacity() * sizeof(const uint32_t*) + arena_.bytes(); }

 private:
  uint32_t* Allocate(size_t n) { return static_cast<uint32_t*>(arena_.Allocate(n * sizeof(uint32_t))); }

  std::vector<const uint32_t*> rows_;
  SharedArena arena_;
};

}  // namespace prefsift
