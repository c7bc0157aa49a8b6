// Dense products written for the machine's vector units, chosen at run
// time, and portable ones with the same bits.
// The kernels take plain pointers and leading dimensions (column-major, as
// Eigen stores a MatrixXd) and instantiate no shared template, so the one
// translation unit that holds vector code (dense_kernels.cc) cannot hand the
// linker an AVX2 or AVX-512 copy of an inline function the rest of the program uses.
// The Eigen-facing wrappers are in dense_products.h.
#ifndef PARITAS_INTERNAL_BASE_DENSE_KERNELS_H_
#define PARITAS_INTERNAL_BASE_DENSE_KERNELS_H_

#include <cstdint>

namespace paritas::internal {

// Which code the dense products run. The fused ones give the same bits: each entry a
// sum over k in order, one fused (correctly rounded) multiply-add per term,
// so no machine parameter, tiling or thread count enters.
enum class DenseKernels {
  // Scalar loops of std::fma (the CPU's instruction where it has one, the C
  // library's exact emulation otherwise, which is slow).
  kPortable,
  // The AVX2 + FMA kernels below.
  kAvx2Fma,
  // The AVX-512 kernels below (the same tiles on vectors of 8 doubles: about
  // 1.5 times the AVX2 kernels' speed on a CPU that executes 512-bit
  // instructions at full width, outlier_screen_bench --kernels).
  kAvx512,
  // Eigen's products (SSE2 on x86-64, with the block sizes FixEigenBlockSizes
  // sets), not fused: for an x86-64 CPU without AVX2 + FMA, where the
  // portable kernels' std::fma is a call into the C library (emulated in
  // software without FMA: about 100 times slower than these). The last
  // digits of a result may differ from those of the two fused paths.
  kUnfused,
};

// Environment variable that, set to anything but "", "0", "unfused",
// "avx2-fma" or "avx512", makes the products take the portable path on any
// CPU (to check that the fused paths agree, or to time the path of a CPU
// without AVX2 + FMA); "unfused" makes them take kUnfused (to reproduce a
// run of a CPU without FMA, or to time it); "avx2-fma" and "avx512" make a
// CPU that has those instructions take those kernels (to check them against
// each other, or to time them) and are ignored on one that has not.
inline constexpr char kPortableKernelsVariable[] = "PARITAS_PORTABLE_KERNELS";

// Returns the kernels this process uses: the one kPortableKernelsVariable
// names when set; otherwise kAvx512 when CpuPrefersAvx512(),
// kAvx2Fma when it has AVX2 and FMA,
// kPortable where std::fma is compiled to one instruction (64-bit ARM),
// kUnfused elsewhere (an x86-64 CPU without AVX2 + FMA, where each std::fma
// would be a call into the C library: 6 times slower with the CPU's FMA,
// about 100 times without). Decided once per process (never by thread
// count), so runs on one machine give the same bits for any number of
// threads.
DenseKernels ActiveDenseKernels();

// "portable", "avx2-fma", "avx512" or "unfused" (as run.json records it).
const char* ToString(DenseKernels kernels);

// Whether this CPU can run the kAvx2Fma kernels (whatever the variable says).
bool CpuHasAvx2Fma();
// Whether this CPU can run the kAvx512 kernels (AVX512F, with the OS saving
// its registers; whatever the variable says).
bool CpuHasAvx512();
// Whether ActiveDenseKernels() takes them there: when the CPU also has
// AVX512-IFMA (Intel from Ice Lake on, AMD from Zen 4 on), not on the
// Skylake-era Xeons whose clock drops under 512-bit instructions (the bits
// are the same either way; only the speed differs).
bool CpuPrefersAvx512();
// Whether the compiler makes each std::fma one instruction of the CPU
// (__FP_FAST_FMA: 64-bit ARM; not x86-64 builds for every CPU).
bool StdFmaIsOneInstruction();

// The kernels. Matrices are column-major: entry (i, j) of x is
// x[i + j * ld_x]. Each sum over k below is formed as acc = 0, then
// acc = fma(x_ik, y_kj, acc) for k = 0, 1, ... in order (one rounding per
// term), whatever the shape; the *Avx512, *Avx2Fma and *Portable versions of
// a kernel give the same bits. Call the *Avx2Fma ones only when
// CpuHasAvx2Fma(), the *Avx512 ones only when CpuHasAvx512().

// Subtracts x x' from the lower triangle of s (m x m): s(i, j) -= sum_k
// x(i, k) x(j, k) for i >= j; x is m x n. The strict upper triangle of s is
// not touched. n may be 0 (s unchanged). x and s must not overlap.
void SubtractGramLowerAvx2Fma(int m, int n, const double* x, int64_t ld_x, double* s, int64_t ld_s);
void SubtractGramLowerAvx512(int m, int n, const double* x, int64_t ld_x, double* s, int64_t ld_s);
void SubtractGramLowerPortable(int m, int n, const double* x, int64_t ld_x, double* s,
                               int64_t ld_s);

// Sets out = a b: a is m x k, b is k x n, out is m x n (not overlapping a or
// b). k may be 0 (out = 0).
void MultiplyAvx2Fma(int m, int n, int k, const double* a, int64_t ld_a, const double* b,
                     int64_t ld_b, double* out, int64_t ld_out);
void MultiplyAvx512(int m, int n, int k, const double* a, int64_t ld_a, const double* b,
                    int64_t ld_b, double* out, int64_t ld_out);
void MultiplyPortable(int m, int n, int k, const double* a, int64_t ld_a, const double* b,
                      int64_t ld_b, double* out, int64_t ld_out);

// Sets out = a b': a is m x k, b is n x k (stored, not transposed), out is
// m x n (not overlapping a or b); out(i, j) = sum_k a(i, k) b(j, k). k may
// be 0 (out = 0).
void MultiplyTransposedAvx2Fma(int m, int n, int k, const double* a, int64_t ld_a,
                               const double* b, int64_t ld_b, double* out, int64_t ld_out);
void MultiplyTransposedAvx512(int m, int n, int k, const double* a, int64_t ld_a,
                              const double* b, int64_t ld_b, double* out, int64_t ld_out);
void MultiplyTransposedPortable(int m, int n, int k, const double* a, int64_t ld_a,
                                const double* b, int64_t ld_b, double* out, int64_t ld_out);

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_BASE_DENSE_KERNELS_H_
