// SmallVector<T, N>: a vector of trivially copyable values that keeps up to N
// of them inside the object (no heap allocation) and moves to the heap beyond
// that. Used for RecordFacts' per-candidate facts, where almost every record
// has 2-4 candidates but a record may have up to limits.max_candidates
// (docs/performance.md).
//
// The interface is the subset of std::vector the code uses. Iterators are
// plain pointers; like std::vector's they are invalidated by growth. Size and
// capacity are 32-bit, so sizeof(SmallVector<T, N>) = max(N * sizeof(T),
// sizeof(T*)) + 8, rounded up to alignof(T).
#pragma once

#include <algorithm>
#include <cstdint>
#include <cstring>
#include <initializer_list>
#include <memory>
#include <span>
#include <type_traits>
#include <utility>
#include <vector>

namespace prefsift {

template <typename T, uint32_t N = 4>
class SmallVector {
  static_assert(std::is_trivially_copyable_v<T>, "SmallVector holds trivially copyable values only");
  static_assert(N > 0, "SmallVector needs room for at least one value inside");

 public:
  using value_type = T;
  using size_type = size_t;
  using iterator = T*;
  using const_iterator = const T*;

  SmallVector() noexcept {}
  SmallVector(std::initializer_list<T> values) { Assign(values.begin(), values.size()); }
  explicit SmallVector(size_t n, const T& value = T()) { resize(n, value); }
  SmallVector(const std::vector<T>& v) { Assign(v.data(), v.size()); }  // NOLINT: implicit, like a copy
  SmallVector(const SmallVector& o) { Assign(o.data(), o.size()); }
  SmallVector(SmallVector&& o) noexcept { Steal(o); }
  ~SmallVector() { Free(); }

  SmallVector& operator=(const SmallVector& o) {
    if (this != &o) {
      clear();
      Assign(o.data(), o.size());
    }
    return *this;
  }
  SmallVector& operator=(SmallVector&& o) noexcept {
    if (this != &o) {
      Free();
      size_ = 0;
      cap_ = N;
      Steal(o);
    }
    return *this;
  }
  SmallVector& operator=(const std::vector<T>& v) {
    clear();
    Assign(v.data(), v.size());
    return *this;
  }
  SmallVector& operator=(std::initializer_list<T> values) {
    clear();
    Assign(values.begin(), values.size());
    return *this;
  }

  size_t size() const { return size_; }
  bool empty() const { return size_ == 0; }
  size_t capacity() const { return cap_; }
  // True while the values are stored inside the object.
  bool is_inline() const { return cap_ == N; }

  T* data() { return is_inline() ? small_ : heap_; }
  const T* data() const { return is_inline() ? small_ : heap_; }
  T& operator[](size_t i) { return data()[i]; }
  const T& operator[](size_t i) const { return data()[i]; }
  T& front() { return data()[0]; }
  const T& front() const { return data()[0]; }
  T& back() { return data()[size_ - 1]; }
  const T& back() const { return data()[size_ - 1]; }
  T* begin() { return data(); }
  T* end() { return data() + size_; }
  const T* begin() const { return data(); }
  const T* end() const { return data() + size_; }

  void reserve(size_t n) {
    if (n > cap_) Grow(n);
  }
  void push_back(const T& value) {
    if (size_ == cap_) {
      const T copy = value;  // `value` may live in this vector
      Grow(std::max<size_t>(size_t{cap_} * 2, size_t{size_} + 1));
      data()[size_++] = copy;
      return;
    }
    data()[size_++] = value;
  }
  void resize(size_t n, const T& value = T()) {
    reserve(n);
    T* d = data();
    for (size_t i = size_; i < n; ++i) d[i] = value;
    size_ = static_cast<uint32_t>(n);
  }
  // Keeps the capacity, like std::vector::clear.
  void clear() { size_ = 0; }

  std::span<const T> span() const { return {data(), size_}; }
  std::vector<T> to_vector() const { return std::vector<T>(begin(), end()); }

  friend bool operator==(const SmallVector& a, const SmallVector& b) {
    return a.size_ == b.size_ && std::equal(a.begin(), a.end(), b.begin());
  }
  friend bool operator==(const SmallVector& a, const std::vector<T>& b) {
    return a.size_ == b.size() && std::equal(a.begin(), a.end(), b.begin());
  }

 private:
  void Assign(const T* values, size_t n) {  // on an empty vector
    reserve(n);
    if (n > 0) std::memcpy(static_cast<void*>(data()), values, n * sizeof(T));
    size_ = static_cast<uint32_t>(n);
  }
  void Grow(size_t n) {  // n > cap_
    T* fresh = std::allocator<T>().allocate(n);
    if (size_ > 0) std::memcpy(static_cast<void*>(fresh), data(), size_ * sizeof(T));
    Free();
    heap_ = fresh;
    cap_ = static_cast<uint32_t>(n);
  }
  void Free() {
    if (!is_inline()) std::allocator<T>().deallocate(heap_, cap_);
  }
  void Steal(SmallVector& o) {  // this holds nothing
    if (o.is_inline()) {
      if (o.size_ > 0) std::memcpy(static_cast<void*>(small_), o.small_, o.size_ * sizeof(T));
    } else {
      heap_ = o.heap_;
      cap_ = o.cap_;
      o.cap_ = N;
    }
    size_ = o.size_;
    o.size_ = 0;
  }

  union {
    T small_[N];  // while cap_ == N
    T* heap_;     // while cap_ > N
  };
  uint32_t size_ = 0;
  uint32_t cap_ = N;
};

}  // namespace prefsift
