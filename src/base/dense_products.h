// The dense products of the outlier screen, the CPD and the aggregation's
// all-pairs sums, on Eigen matrices: each runs the AVX-512 or AVX2 + FMA
// kernel of dense_kernels.h when ActiveDenseKernels() says so and the
// portable kernel otherwise, which give the same bits (every entry one in-order chain of
// fused multiply-adds); on a CPU without FMA, Eigen's own product (kUnfused). Compiled with the project's flags like their callers
// (no vector code here).
#ifndef PARITAS_INTERNAL_BASE_DENSE_PRODUCTS_H_
#define PARITAS_INTERNAL_BASE_DENSE_PRODUCTS_H_

#include <omp.h>

#include <Eigen/Core>
#include <algorithm>

#include "base/dense_kernels.h"

namespace paritas::internal {

using ConstMatrixRef = Eigen::Ref<const Eigen::MatrixXd>;

// The fused kernels of one path (dense_kernels.h), all with the same bits.
struct FusedKernels {
  decltype(&MultiplyPortable) multiply;
  decltype(&MultiplyTransposedPortable) multiply_transposed;
  decltype(&SubtractGramLowerPortable) subtract_gram_lower;
};

// The fused kernels ActiveDenseKernels() names (the portable ones for
// kPortable; never asked for under kUnfused).
inline const FusedKernels& ActiveFusedKernels() {
  static const FusedKernels avx512{MultiplyAvx512, MultiplyTransposedAvx512, SubtractGramLowerAvx512};
  static const FusedKernels avx2{MultiplyAvx2Fma, MultiplyTransposedAvx2Fma, SubtractGramLowerAvx2Fma};
  static const FusedKernels portable{MultiplyPortable, MultiplyTransposedPortable,
                                     SubtractGramLowerPortable};
  switch (ActiveDenseKernels()) {
    case DenseKernels::kAvx512:
      return avx512;
    case DenseKernels::kAvx2Fma:
      return avx2;
    default:
      return portable;
  }
}

// Runs run(j0, cols) over blocks of the n output columns: on OpenMP's
// threads when the product has at least 2^24 terms and the caller is not in
// a parallel region, on the calling thread otherwise. Each entry is computed
// the same way in any block, so the split never changes a bit.
template <typename Run>
void InColumnBlocks(Eigen::Index m, Eigen::Index n, Eigen::Index k, const Run& run) {
  constexpr double kParallelTerms = 16.0 * 1024 * 1024;
  const int threads = omp_in_parallel() ? 1 : omp_get_max_threads();
  if (threads <= 1 || static_cast<double>(m) * n * k < kParallelTerms || n < 8) {
    run(Eigen::Index{0}, n);
    return;
  }
  // Blocks of whole 4-column tiles, a few per thread for balance.
  const Eigen::Index step = std::max<Eigen::Index>(4, (n / (4 * threads) + 3) / 4 * 4);
  const Eigen::Index num_blocks = (n + step - 1) / step;
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (Eigen::Index block = 0; block < num_blocks; ++block) {
    const Eigen::Index j0 = block * step;
    run(j0, std::min(step, n - j0));
  }
}

// Subtracts x x' from the lower triangle of the square s (s.rows() ==
// x.rows()); the strict upper triangle is left as it was.
inline void SubtractGramLower(const ConstMatrixRef& x, Eigen::MatrixXd* s) {
  eigen_assert(s->rows() == x.rows() && s->cols() == x.rows());
  const int m = static_cast<int>(x.rows()), n = static_cast<int>(x.cols());
  if (ActiveDenseKernels() == DenseKernels::kUnfused) {
    s->selfadjointView<Eigen::Lower>().rankUpdate(x, -1.0);
  } else {
    ActiveFusedKernels().subtract_gram_lower(m, n, x.data(), x.outerStride(), s->data(), s->rows());
  }
}

// Sets *out = a b (out not overlapping a or b).
inline void SetProduct(const ConstMatrixRef& a, const ConstMatrixRef& b, Eigen::MatrixXd* out) {
  eigen_assert(a.cols() == b.rows() && out->data() != a.data() && out->data() != b.data());
  if (ActiveDenseKernels() == DenseKernels::kUnfused) {
    out->noalias() = a * b;
    return;
  }
  out->resize(a.rows(), b.cols());
  const auto multiply = ActiveFusedKernels().multiply;
  const int m = static_cast<int>(a.rows()), k = static_cast<int>(a.cols());
  InColumnBlocks(m, b.cols(), k, [&](Eigen::Index j0, Eigen::Index cols) {
    const double* b_block = b.data() + j0 * b.outerStride();
    double* out_block = out->data() + j0 * out->rows();
    multiply(m, static_cast<int>(cols), k, a.data(), a.outerStride(), b_block, b.outerStride(),
             out_block, out->rows());
  });
}

// Sets out = a b' (out already a.rows() x b.rows(), not overlapping a or
// b): out(i, j) = sum_k a(i, k) b(j, k), for the all-pairs sums of two
// region x heading arrays.
inline void SetProductTransposed(const ConstMatrixRef& a, const ConstMatrixRef& b,
                                 Eigen::Ref<Eigen::MatrixXd> out) {
  eigen_assert(a.cols() == b.cols() && out.rows() == a.rows() && out.cols() == b.rows());
  if (ActiveDenseKernels() == DenseKernels::kUnfused) {
    out.noalias() = a * b.transpose();
    return;
  }
  const auto multiply_transposed = ActiveFusedKernels().multiply_transposed;
  const int m = static_cast<int>(a.rows()), k = static_cast<int>(a.cols());
  InColumnBlocks(m, b.rows(), k, [&](Eigen::Index j0, Eigen::Index cols) {
    const double* b_block = b.data() + j0;  // rows j0 .. of b
    double* out_block = out.data() + j0 * out.outerStride();
    multiply_transposed(m, static_cast<int>(cols), k, a.data(), a.outerStride(), b_block,
                        b.outerStride(), out_block, out.outerStride());
  });
}

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_BASE_DENSE_PRODUCTS_H_
