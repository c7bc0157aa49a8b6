// Keeps Eigen's matrix products on the calling thread, and their blocking
// independent of the CPU's caches.
#ifndef PARITAS_INTERNAL_BASE_EIGEN_THREADS_H_
#define PARITAS_INTERNAL_BASE_EIGEN_THREADS_H_

#include <omp.h>

#include <cstddef>

#include <Eigen/Core>

namespace paritas::internal {

// Called first in the body of every parallel loop whose work uses Eigen. A
// team of one thread (--threads 1) is not an active parallel region, so
// without it Eigen would start a team of its own inside each large product,
// while with two threads it would not; Eigen's blocking of a product depends
// on its thread count, which changes the order of a sum and so the last digit
// (seen on 1,000-region headings). With it, every product runs on one thread
// whatever --threads is, and output is byte-identical for any thread count.
// It sets this task's OpenMP thread count only, never the caller's.
inline void KeepEigenOnThisThread() { omp_set_num_threads(1); }

// Eigen splits a long product's sums into blocks sized by the cache sizes it
// reads from the CPU, so the last digits of a product (a CPD's Schur
// complement of 50 items x 1,000 regions, say) would depend on the CPU: an
// L1 of 16 or 64 KiB instead of 32 changes most entries. Called at the start
// of each computation (ComputeParities, FindOutliers, RunSensitivity; never
// inside a parallel region, as it sets Eigen's process-wide sizes), it fixes
// them to the sizes Eigen reads on the machine the project's outputs are
// checked on, so any CPU gives those bits. Speed may differ a little on
// other caches; results do not.
inline void FixEigenBlockSizes() {
  constexpr std::ptrdiff_t kL1 = std::ptrdiff_t{32} << 10;
  constexpr std::ptrdiff_t kL2 = std::ptrdiff_t{1} << 20;
  constexpr std::ptrdiff_t kL3 = std::ptrdiff_t{320} << 20;
  if (Eigen::l1CacheSize() != kL1 || Eigen::l2CacheSize() != kL2 || Eigen::l3CacheSize() != kL3) {
    Eigen::setCpuCacheSizes(kL1, kL2, kL3);
  }
}

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_BASE_EIGEN_THREADS_H_
