// glibc's malloc serves each block of 128 KiB or more from a mapping of its
// own and gives it back to the kernel when it is freed, so every large array
// of a run (the quotes, the cells, the screen's and the writers' buffers)
// lands on fresh pages that the kernel must zero on first touch: on T
// (21 million quotes) that was 2.3-2.8 s of system time, 1.2 s of it in the
// cells stage alone, on memory the previous stage had just released. Kept
// for reuse instead, the freed blocks serve the next stage at once.
#ifndef PARITAS_INTERNAL_BASE_MEMORY_REUSE_H_
#define PARITAS_INTERNAL_BASE_MEMORY_REUSE_H_

#include <climits>

#if defined(__GLIBC__)
#include <malloc.h>
#endif

namespace paritas::internal {

// Makes malloc serve large blocks from its heap (M_MMAP_MAX 0: no block gets
// a mapping of its own while the heap can grow) and keep freed memory there
// (M_TRIM_THRESHOLD: the heap's free top is not given back below 2 GiB),
// one heap for every thread (M_ARENA_MAX 1: a worker thread's arrays reuse
// what the calling thread freed instead of fresh pages of an arena of its
// own). Call it before the process starts a thread.
// For a process that runs one job and exits, as the command line does; a
// long-lived program that embeds the library keeps malloc's defaults.
// Results never depend on it. Returns false where the C library has no
// such settings (then nothing changes).
inline bool KeepFreedMemoryForReuse() {
#if defined(__GLIBC__)
  return mallopt(M_MMAP_MAX, 0) == 1 && mallopt(M_TRIM_THRESHOLD, INT_MAX) == 1 &&
         mallopt(M_ARENA_MAX, 1) == 1;
#else
  return false;
#endif
}

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_BASE_MEMORY_REUSE_H_
