// FlatRows<T>: many short rows of T in one contiguous array, with one offset
// per row (compressed sparse row layout). It replaces a std::vector of
// std::vector (or of std::string): no heap block, vector header or slack per
// row, and rows sit next to each other in the order they were added.
// FlatStrings is the same for text: row i as a std::string_view.
// Pack keeps the values compressed (packed_bytes.h) while no row is read.
// Thread-safety: build on one thread; const members may then run concurrently.
#pragma once

#include <cstddef>
#include <cstdint>
#include <span>
#include <string_view>
#include <vector>

#include "stages/leakage/packed_bytes.h"

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
  size_t values() const { return starts_.back(); }
  void Reserve(size_t rows, size_t values) {
    starts_.reserve(rows + 1);
    values_.reserve(values);
  }
  // Gives back unused capacity (after the last Add).
  void ShrinkToFit() {
    starts_.shrink_to_fit();
    values_.shrink_to_fit();
  }
  // Compresses the values until Unpack: rows must not be read (nor added) in
  // between; size() and values() still work. False (nothing changed) when
  // compression fails. REQUIRES: T trivially copyable.
  bool Pack() {
    if (packed_ || values_.empty()) return true;
    std::vector<char> p;
    if (!PackBytes(std::as_bytes(std::span<const T>(values_)), &p)) return false;
    packed_chars_ = std::move(p);
    std::vector<T>().swap(values_);
    packed_ = true;
    return true;
  }
  // Makes the values again. False when they cannot be (not expected: the
  // data never leaves this object); the rows are then empty.
  bool Unpack() {
    if (!packed_) return true;
    std::vector<T> v(starts_.back());
    const bool ok = UnpackBytes(packed_chars_, std::as_writable_bytes(std::span<T>(v)));
    std::vector<char>().swap(packed_chars_);
    packed_ = false;
    if (!ok) {
      *this = FlatRows();
      return false;
    }
    values_ = std::move(v);
    return true;
  }
  bool packed() const { return packed_; }
  uint64_t bytes() const {
    return starts_.capacity() * sizeof(size_t) + values_.capacity() * sizeof(T) + packed_chars_.capacity();
  }

 private:
  std::vector<size_t> starts_;  // row i is values_[starts_[i], starts_[i + 1])
  std::vector<T> values_;
  std::vector<char> packed_chars_;  // values_ compressed, while packed_
  bool packed_ = false;
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
  bool Pack() { return rows_.Pack(); }
  bool Unpack() { return rows_.Unpack(); }
  bool packed() const { return rows_.packed(); }
  uint64_t bytes() const { return rows_.bytes(); }

 private:
  FlatRows<char> rows_;
};

}  // namespace prefsift
