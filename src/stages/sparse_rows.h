// SparseRows<T>: one value per record where most records have none (findings,
// flagged pairs). A record costs one pointer (8 bytes, null when it has no
// value) instead of an empty std::vector (24 bytes) or struct; at a million
// records that is the difference (docs/performance.md, "Memory").
//
// Thread-safety: like std::vector: distinct rows may be set concurrently
// (each Observe call writes its own record), resize/reserve are not
// concurrent with anything.
#pragma once

#include <cstddef>
#include <memory>
#include <utility>
#include <vector>

namespace prefsift {

template <typename T>
class SparseRows {
 public:
  void reserve(size_t n) { rows_.reserve(n); }
  void resize(size_t n) { rows_.resize(n); }
  size_t size() const { return rows_.size(); }
  void clear() { std::vector<std::unique_ptr<T>>().swap(rows_); }

  // The row's value, or an empty T when it has none.
  const T& operator[](size_t i) const { return rows_[i] ? *rows_[i] : Empty(); }
  bool Has(size_t i) const { return rows_[i] != nullptr; }
  // Stores `value` as row i (the caller leaves out empty values).
  void Set(size_t i, T value) { rows_[i] = std::make_unique<T>(std::move(value)); }
  void Reset(size_t i) { rows_[i].reset(); }
  // Row i to change in place, made (empty) when it has none.
  T& Mutable(size_t i) {
    if (!rows_[i]) rows_[i] = std::make_unique<T>();
    return *rows_[i];
  }

 private:
  static const T& Empty() {
    static const T empty{};
    return empty;
  }
  std::vector<std::unique_ptr<T>> rows_;
};

}  // namespace prefsift
