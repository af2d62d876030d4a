// An allocator whose value-less construct() default-initialises: a
// std::vector<T, DefaultInitAllocator<T>> of a trivial T grows (resize)
// without writing zeros, so its new pages are first touched by whoever fills
// them. For per-record arrays that pass 1's workers fill in parallel (every
// element written by its record's Observe before anything reads it): resizing
// them on the one thread between two parallel loops would otherwise zero, and
// fault in, hundreds of megabytes there (the near stage's signatures: 256
// bytes a record).
// Thread-safety: as std::allocator.
#pragma once

#include <memory>
#include <new>
#include <utility>
#include <vector>

namespace prefsift {

template <typename T, typename Base = std::allocator<T>>
class DefaultInitAllocator : public Base {
  using Traits = std::allocator_traits<Base>;

 public:
  template <typename U>
  struct rebind {
    using other = DefaultInitAllocator<U, typename Traits::template rebind_alloc<U>>;
  };
  using Base::Base;
  DefaultInitAllocator() = default;
  template <typename U, typename B>
  DefaultInitAllocator(const DefaultInitAllocator<U, B>& other) noexcept : Base(other) {}

  template <typename U>
  void construct(U* p) noexcept(std::is_nothrow_default_constructible_v<U>) {
    ::new (static_cast<void*>(p)) U;  // default-initialised: no zeroing for trivial U
  }
  template <typename U, typename... Args>
  void construct(U* p, Args&&... args) {
    Traits::construct(static_cast<Base&>(*this), p, std::forward<Args>(args)...);
  }
};

// A vector whose resize() leaves new trivial elements unwritten.
template <typename T>
using FillLaterVector = std::vector<T, DefaultInitAllocator<T>>;

}  // namespace prefsift
