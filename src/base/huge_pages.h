// Large arrays filled once (the quotes of a survey, the pairs of the
// duplicate search) cost one page fault per 4 KiB when first written: about
// 55,000 faults for 7 million quotes. Where the kernel leaves huge pages to
// the program's choice (transparent_hugepage "madvise"), asking for them
// makes that one fault per 2 MiB; mapping the pages in one call before
// they are written (MapForWriting) takes one call instead of those faults.
#ifndef PARITAS_INTERNAL_BASE_HUGE_PAGES_H_
#define PARITAS_INTERNAL_BASE_HUGE_PAGES_H_

#include <cstddef>
#include <cstdint>

#if defined(__linux__)
#include <sys/mman.h>
#include <unistd.h>
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

// Maps the whole pages inside [data, data + bytes) for writing, in one
// call, before they are written: what a first write would do page by page,
// one page fault each (on the benchmark machine, a virtual one, 168 MB took
// 0.42 s to fault page by page and 0.20 s after this call, of which the
// call 0.02 s; bench/HISTORY.md, "Fourteenth round"); memory advised as huge
// pages is mapped in huge pages where the kernel has them. Only a hint
// (MADV_POPULATE_WRITE, Linux 5.14): the contents are left as they are and
// the pages at either end are left to fault. Returns whether the kernel
// mapped them; one without the call refuses it, which is otherwise ignored.
// For memory about to be written whole: the pages stay in memory until
// freed. Ranges under 16 pages are left alone.
inline bool MapForWriting(const void* data, size_t bytes) {
#if defined(__linux__) && defined(MADV_POPULATE_WRITE)
  static const uintptr_t page = [] {
    const long size = ::sysconf(_SC_PAGESIZE);
    return static_cast<uintptr_t>(size > 0 ? size : 4096);
  }();
  if (data == nullptr || bytes < 16 * page) return false;
  const uintptr_t begin = (reinterpret_cast<uintptr_t>(data) + page - 1) & ~(page - 1);
  const uintptr_t end = (reinterpret_cast<uintptr_t>(data) + bytes) & ~(page - 1);
  return end > begin && ::madvise(reinterpret_cast<void*>(begin), end - begin, MADV_POPULATE_WRITE) == 0;
#else
  (void)data;
  (void)bytes;
  return false;
#endif
}

// The same for the capacity of a vector.
template <typename Vector>
void AdviseHugePages(const Vector& vector) {
  AdviseHugePages(vector.data(), vector.capacity() * sizeof(*vector.data()));
}

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_BASE_HUGE_PAGES_H_
