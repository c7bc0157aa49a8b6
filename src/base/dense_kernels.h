// Dense products written for the machine's vector units, chosen at run time.
// The kernels take plain pointers and leading dimensions (column-major, as
// Eigen stores a MatrixXd) and instantiate no shared template, so the one
// translation unit that holds AVX2 code (dense_kernels.cc) cannot hand the
// linker an AVX2 copy of an inline function the rest of the program uses.
// The Eigen-facing wrappers are in dense_products.h.
#ifndef PARITAS_INTERNAL_BASE_DENSE_KERNELS_H_
#define PARITAS_INTERNAL_BASE_DENSE_KERNELS_H_

#include <cstdint>

namespace paritas::internal {

// Which code the dense products run.
enum class DenseKernels {
  // Eigen's products as the build compiled them (SSE2 on x86-64). Eigen
  // blocks long sums by the cache sizes it reads from the CPU, so CPUs with
  // other caches (an L1 of 64 KiB against 32 or 48) may differ in the last
  // digits even here.
  kPortable,
  // The AVX2 + FMA kernels below: each entry a sum over k in order, one
  // fused multiply-add per term; no machine parameter enters, so every CPU
  // with AVX2 + FMA gives the same bits, but not the portable products'
  // (the last digits of a result may differ).
  kAvx2Fma,
};

// Environment variable that, set to anything but "" or "0", makes the
// products take the portable path on any CPU (to reproduce another
// machine's run bit for bit).
inline constexpr char kPortableKernelsVariable[] = "PARITAS_PORTABLE_KERNELS";

// Returns the kernels this process uses: kAvx2Fma when the CPU has AVX2 and
// FMA and kPortableKernelsVariable is not set, kPortable otherwise. Decided
// once per process (never by thread count), so runs on one machine give the
// same bits for any number of threads.
DenseKernels ActiveDenseKernels();

// "portable" or "avx2-fma" (as run.json records it).
const char* ToString(DenseKernels kernels);

// Whether this CPU can run the kAvx2Fma kernels (whatever the variable says).
bool CpuHasAvx2Fma();

// The AVX2 + FMA kernels; call them only when CpuHasAvx2Fma(). Matrices are
// column-major: entry (i, j) of x is x[i + j * ld_x]. Each sum over k below
// is formed as acc = 0, then acc = fma(x_ik, y_kj, acc) for k = 0, 1, ... in
// order (one rounding per term), whatever the shape.

// Subtracts x x' from the lower triangle of s (m x m): s(i, j) -= sum_k
// x(i, k) x(j, k) for i >= j; x is m x n. The strict upper triangle of s is
// not touched. n may be 0 (s unchanged). x and s must not overlap.
void SubtractGramLowerAvx2Fma(int m, int n, const double* x, int64_t ld_x, double* s, int64_t ld_s);

// Sets out = a b: a is m x k, b is k x n, out is m x n (not overlapping a or
// b). k may be 0 (out = 0).
void MultiplyAvx2Fma(int m, int n, int k, const double* a, int64_t ld_a, const double* b,
                     int64_t ld_b, double* out, int64_t ld_out);

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_BASE_DENSE_KERNELS_H_
