// Large arrays filled once (the quotes of a survey, the pairs of the
// duplicate search) cost one page fault per 4 KiB when first written: about
// 55,000 faults for 7 million quotes. Where the kernel leaves huge pages to
// the program's choice (transparent_hugepage "madvise"), asking for them
// makes that one fault per 2 MiB.
#ifndef PARITAS_INTERNAL_BASE_HUGE_PAGES_H_
#define PARITAS_INTERNAL_BASE_HUGE_PAGES_H_

#include <cstddef>
#include <cstdint>

#if defined(__linux__)
#include <sys/mman.h>
#endif

namespace paritas::internal {

// Asks for huge pages for the whole 2 MiB pages inside [data, data + bytes)
// when that is at least 4 MiB; only a hint (memory and results are the
// same either way), best given before the memory is first written.
inline void AdviseHugePages(const void* data, size_t bytes) {
#if defined(__linux__) && defined(MADV_HUGEPAGE)
  constexpr uintptr_t kHuge = uintptr_t{1} << 21;
  if (data == nullptr || bytes < 2 * kHuge) return;
  const uintptr_t begin = (reinterpret_cast<uintptr_t>(data) + kHuge - 1) & ~(kHuge - 1);
  const uintptr_t end = (reinterpret_cast<uintptr_t>(data) + bytes) & ~(kHuge - 1);
  if (end > begin) ::madvise(reinterpret_cast<void*>(begin), end - begin, MADV_HUGEPAGE);
#else
  (void)data;
  (void)bytes;
#endif
}

// The same for the capacity of a vector.
template <typename Vector>
void AdviseHugePages(const Vector& vector) {
  AdviseHugePages(vector.data(), vector.capacity() * sizeof(*vector.data()));
}

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_BASE_HUGE_PAGES_H_
