// FlatRows<T>: many short rows of T in one contiguous array, with one offset
// per row (compressed sparse row layout). It replaces a std::vector of
// std::vector (or of std::string): no heap block, vector header or slack per
// row, and rows sit next to each other in the order they were added.
// FlatStrings is the same for text: row i as a std::string_view.
// Thread-safety: build on one thread; const members may then run concurrently.
#pragma once

#include <cstdint>
#include <span>
#include <string_view>
#include <vector>

namespace prefsift {

template <typename T>
class FlatRows {
 public:
  FlatRows() : starts_{0} {}
  // Appends one row; returns its index.
  size_t Add(std::span<const T> row) {
    values_.insert(values_.end(), row.begin(), row.end());
    starts_.push_back(values_.size());
    return starts_.size() - 2;
  }
  // Grows the last row (REQUIRES: size() > 0).
  void Extend(std::span<const T> more) {
    values_.insert(values_.end(), more.begin(), more.end());
    starts_.back() = values_.size();
  }
  std::span<const T> operator[](size_t row) const {
    return std::span<const T>(values_.data() + starts_[row], starts_[row + 1] - starts_[row]);
  }
  size_t size() const { return starts_.size() - 1; }
  size_t values() const { return values_.size(); }
  void Reserve(size_t rows, size_t values) {
    starts_.reserve(rows + 1);
    values_.reserve(values);
  }
  // Gives back unused capacity (after the last Add).
  void ShrinkToFit() {
    starts_.shrink_to_fit();
    values_.shrink_to_fit();
  }
  uint64_t bytes() const { return starts_.capacity() * sizeof(size_t) + values_.capacity() * sizeof(T); }

 private:
  std::vector<size_t> starts_;  // row i is values_[starts_[i], starts_[i + 1])
  std::vector<T> values_;
};

class FlatStrings {
 public:
  size_t Add(std::string_view s) { return rows_.Add(std::span<const char>(s.data(), s.size())); }
  std::string_view operator[](size_t i) const {
    auto r = rows_[i];
    return std::string_view(r.data(), r.size());
  }
  size_t size() const { return rows_.size(); }
  void Reserve(size_t rows, size_t chars) { rows_.Reserve(rows, chars); }
  void ShrinkToFit() { rows_.ShrinkToFit(); }
  uint64_t bytes() const { return rows_.bytes(); }

 private:
  FlatRows<char> rows_;
};

}  // namespace prefsift
