// Keeps Eigen's matrix products on the calling thread.
#ifndef PARITAS_INTERNAL_BASE_EIGEN_THREADS_H_
#define PARITAS_INTERNAL_BASE_EIGEN_THREADS_H_

#include <omp.h>

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

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_BASE_EIGEN_THREADS_H_
