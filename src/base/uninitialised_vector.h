// A std::vector whose resize(n) leaves new elements of a trivial type
// uninitialised, for large arrays that are written in parallel right after
// they are sized: a zero-fill first would touch (and page-fault) every page
// on one thread, and write the memory twice. resize(n, value), insert and
// push_back initialise as usual.
#ifndef PARITAS_INTERNAL_BASE_UNINITIALISED_VECTOR_H_
#define PARITAS_INTERNAL_BASE_UNINITIALISED_VECTOR_H_

#include <memory>
#include <new>
#include <type_traits>
#include <utility>
#include <vector>

namespace paritas::internal {

// std::allocator, except that a value constructed with no arguments is
// default-initialised (left as it is for a trivial type), not zeroed.
template <typename T>
class DefaultInitAllocator : public std::allocator<T> {
 public:
  template <typename U>
  struct rebind {
    using other = DefaultInitAllocator<U>;
  };

  DefaultInitAllocator() = default;
  template <typename U>
  DefaultInitAllocator(const DefaultInitAllocator<U>& /*other*/) noexcept {}

  template <typename U>
  void construct(U* at) noexcept(std::is_nothrow_default_constructible_v<U>) {
    ::new (static_cast<void*>(at)) U;
  }
  template <typename U, typename... Args>
  void construct(U* at, Args&&... args) {
    std::allocator_traits<std::allocator<T>>::construct(static_cast<std::allocator<T>&>(*this),
                                                        at, std::forward<Args>(args)...);
  }
};

template <typename T>
using UninitialisedVector = std::vector<T, DefaultInitAllocator<T>>;

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_BASE_UNINITIALISED_VECTOR_H_
