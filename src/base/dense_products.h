// The dense products that dominate the outlier screen's fit, on
// Eigen matrices: each runs the AVX2 + FMA kernel of dense_kernels.h when
// ActiveDenseKernels() says so and Eigen's product otherwise. Compiled with
// the project's flags like their callers (no AVX2 code here).
#ifndef PARITAS_INTERNAL_BASE_DENSE_PRODUCTS_H_
#define PARITAS_INTERNAL_BASE_DENSE_PRODUCTS_H_

#include <Eigen/Core>

#include "base/dense_kernels.h"

namespace paritas::internal {

// Subtracts x x' from the lower triangle of the square s (s.rows() ==
// x.rows()); the strict upper triangle is left as it was.
inline void SubtractGramLower(const Eigen::MatrixXd& x, Eigen::MatrixXd* s) {
  eigen_assert(s->rows() == x.rows() && s->cols() == x.rows());
  if (ActiveDenseKernels() == DenseKernels::kAvx2Fma) {
    SubtractGramLowerAvx2Fma(static_cast<int>(x.rows()), static_cast<int>(x.cols()), x.data(),
                             x.rows(), s->data(), s->rows());
  } else {
    s->selfadjointView<Eigen::Lower>().rankUpdate(x, -1.0);
  }
}

// Sets *out = a b (out not a or b).
inline void SetProduct(const Eigen::MatrixXd& a, const Eigen::MatrixXd& b, Eigen::MatrixXd* out) {
  eigen_assert(a.cols() == b.rows() && out != &a && out != &b);
  if (ActiveDenseKernels() == DenseKernels::kAvx2Fma) {
    out->resize(a.rows(), b.cols());
    MultiplyAvx2Fma(static_cast<int>(a.rows()), static_cast<int>(b.cols()),
                    static_cast<int>(a.cols()), a.data(), a.rows(), b.data(), b.rows(), out->data(),
                    out->rows());
  } else {
    out->noalias() = a * b;
  }
}

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_BASE_DENSE_PRODUCTS_H_
