// The dense products' kernels: AVX-512, AVX2 + FMA and portable ones that
// give the same bits. Only the functions marked PARITAS_VECTOR_TARGET (in
// dense_tiles.inc, included once per instruction set) are compiled for AVX2
// or AVX-512; the file is built with the project's flags like every other,
// and those functions include no Eigen and call no template, so nothing here
// can replace another translation unit's copy of an inline function (see
// DEVELOPERS.md, "Vector kernels"). Every entry is one in-order chain of
// fused multiply-adds, so neither the tiling (which rows and columns share
// registers), the vector width nor the path taken changes a bit.
#include "base/dense_kernels.h"

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <cstring>
#include <vector>

// Every sum below must be the chain its header documents: no contraction
// into other fused operations (there is no a * b + c to contract: each term
// is an explicit std::fma) and no reassociation, which only -ffast-math or
// -fassociative-math would allow.
#if defined(__FAST_MATH__) || defined(__ASSOCIATIVE_MATH__)
#error "dense_kernels.cc must not be compiled with -ffast-math or -fassociative-math"
#endif

#if defined(__x86_64__)
#include <immintrin.h>
#endif

namespace paritas::internal {

const char* ToString(DenseKernels kernels) {
  switch (kernels) {
    case DenseKernels::kAvx2Fma:
      return "avx2-fma";
    case DenseKernels::kAvx512:
      return "avx512";
    case DenseKernels::kUnfused:
      return "unfused";
    case DenseKernels::kPortable:
      break;
  }
  return "portable";
}

bool StdFmaIsOneInstruction() {
#if defined(__FP_FAST_FMA)
  return true;
#else
  return false;
#endif
}

namespace {

// Sets the m x n block at out to +0 (the value of an empty sum).
void ClearColumns(int m, int n, double* out, int64_t ld_out) {
  for (int j = 0; j < n; ++j) {
    for (int i = 0; i < m; ++i) out[i + j * ld_out] = 0.0;
  }
}

// out = a b as in MultiplyTiles below, one entry's chain at a time in a
// column of accumulators (out itself): std::fma rounds once, as the vector
// instruction does, so each entry gets the same bits.
void MultiplyPortable(int m, int n, int k, const double* a, int64_t ld_a, const double* b,
                      int64_t b_step, int64_t b_column_step, double* out, int64_t ld_out) {
  ClearColumns(m, n, out, ld_out);
  for (int j = 0; j < n; ++j) {
    double* column = out + j * ld_out;
    for (int p = 0; p < k; ++p) {
      const double b_pj = b[p * b_step + j * b_column_step];
      const double* a_p = a + p * ld_a;
      for (int i = 0; i < m; ++i) column[i] = std::fma(a_p[i], b_pj, column[i]);
    }
  }
}

}  // namespace

void SubtractGramLowerPortable(int m, int n, const double* x, int64_t ld_x, double* s,
                               int64_t ld_s) {
  if (n == 0) return;  // as the vector kernel: s - 0 is s, -0 included
  std::vector<double> sums(static_cast<size_t>(m));
  for (int j = 0; j < m; ++j) {
    std::fill(sums.begin() + j, sums.end(), 0.0);
    for (int p = 0; p < n; ++p) {
      const double* x_p = x + p * ld_x;
      const double x_jp = x_p[j];
      for (int i = j; i < m; ++i) sums[i] = std::fma(x_p[i], x_jp, sums[i]);
    }
    for (int i = j; i < m; ++i) s[i + j * ld_s] -= sums[i];
  }
}

void MultiplyPortable(int m, int n, int k, const double* a, int64_t ld_a, const double* b,
                      int64_t ld_b, double* out, int64_t ld_out) {
  MultiplyPortable(m, n, k, a, ld_a, b, 1, ld_b, out, ld_out);
}

void MultiplyTransposedPortable(int m, int n, int k, const double* a, int64_t ld_a,
                                const double* b, int64_t ld_b, double* out, int64_t ld_out) {
  MultiplyPortable(m, n, k, a, ld_a, b, ld_b, 1, out, ld_out);
}

#if defined(__x86_64__)

bool CpuHasAvx2Fma() {
  // libgcc's and compiler-rt's checks include the OS saving the YMM state.
  return __builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma");
}

bool CpuHasAvx512() {
  // Includes the OS saving the ZMM and mask registers, as above.
  return __builtin_cpu_supports("avx512f");
}

bool CpuPrefersAvx512() {
  // AVX512-IFMA marks the CPUs from Intel's Ice Lake and AMD's Zen 4 on,
  // whose 512-bit instructions do not lower the core's clock much; the
  // Skylake-era Xeons before them (AVX512F without IFMA) slow the whole
  // core down for them, so they keep the AVX2 kernels.
  return CpuHasAvx512() && __builtin_cpu_supports("avx512ifma");
}

namespace {

// The tile shape of both instruction sets: up to kMaxVectors vectors of rows
// by kTileColumns columns, 12 accumulators (12 x 4 doubles with AVX2, 24 x 4
// with AVX-512; wider AVX-512 tiles, 24 x 8 and 16 x 12, were slower here).
constexpr int kMaxVectors = 3;
constexpr int kTileColumns = 4;

// Where the operands of one product are: a is m x k, b(p, c) is at
// b[p * b_step + c * b_column_step] (b itself with b_step 1, the transpose
// of a stored matrix with b_column_step 1).
struct ProductOperands {
  int m, n, k;
  const double* a;
  int64_t ld_a;
  const double* b;
  int64_t b_step, b_column_step;
};

// Steps of the sums per block: a tile of a (12 or 24 rows, 24 or 48 KiB)
// stays in the L1 or L2 cache and a panel of b in the L2 cache however long
// the sums are; the sums of one block go on from those of the last (see
// TileOperands::start in dense_tiles.inc).
constexpr int kDepthBlock = 256;
// Columns of b per panel: about kPanelBytes of b, a multiple of the tile's
// columns.
constexpr int64_t kPanelBytes = int64_t{192} << 10;
int PanelColumns(int n, int k) {
  const int depth = k < kDepthBlock ? k : kDepthBlock;
  const int64_t fit = kPanelBytes / (static_cast<int64_t>(depth) * 8);
  const int widest = static_cast<int>(fit < n ? fit : n) / kTileColumns * kTileColumns;
  return widest < kTileColumns ? kTileColumns : widest;
}

namespace avx2 {

#define PARITAS_VECTOR_TARGET __attribute__((target("avx2,fma")))
#define PARITAS_VECTOR_INLINE PARITAS_VECTOR_TARGET inline __attribute__((always_inline))

using Vector = __m256d;
using LaneMask = __m256i;
constexpr int kLanes = 4;

PARITAS_VECTOR_INLINE LaneMask FirstLanes(int rows) {
  return _mm256_cmpgt_epi64(_mm256_set1_epi64x(rows), _mm256_setr_epi64x(0, 1, 2, 3));
}
PARITAS_VECTOR_INLINE Vector Zero() { return _mm256_setzero_pd(); }
PARITAS_VECTOR_INLINE Vector Load(const double* p) { return _mm256_loadu_pd(p); }
PARITAS_VECTOR_INLINE Vector LoadFirst(const double* p, LaneMask mask) { return _mm256_maskload_pd(p, mask); }
PARITAS_VECTOR_INLINE void Store(double* p, Vector v) { _mm256_storeu_pd(p, v); }
PARITAS_VECTOR_INLINE void StoreFirst(double* p, LaneMask mask, Vector v) { _mm256_maskstore_pd(p, mask, v); }
PARITAS_VECTOR_INLINE Vector Broadcast(const double* p) { return _mm256_broadcast_sd(p); }
PARITAS_VECTOR_INLINE Vector MultiplyAdd(Vector a, Vector b, Vector c) { return _mm256_fmadd_pd(a, b, c); }

#include "base/dense_tiles.inc"

#undef PARITAS_VECTOR_INLINE
#undef PARITAS_VECTOR_TARGET

}  // namespace avx2

namespace avx512 {

#define PARITAS_VECTOR_TARGET __attribute__((target("avx512f,avx2,fma")))
#define PARITAS_VECTOR_INLINE PARITAS_VECTOR_TARGET inline __attribute__((always_inline))

using Vector = __m512d;
using LaneMask = __mmask8;
constexpr int kLanes = 8;

PARITAS_VECTOR_INLINE LaneMask FirstLanes(int rows) { return static_cast<LaneMask>((1u << rows) - 1u); }
PARITAS_VECTOR_INLINE Vector Zero() { return _mm512_setzero_pd(); }
PARITAS_VECTOR_INLINE Vector Load(const double* p) { return _mm512_loadu_pd(p); }
PARITAS_VECTOR_INLINE Vector LoadFirst(const double* p, LaneMask mask) { return _mm512_maskz_loadu_pd(mask, p); }
PARITAS_VECTOR_INLINE void Store(double* p, Vector v) { _mm512_storeu_pd(p, v); }
PARITAS_VECTOR_INLINE void StoreFirst(double* p, LaneMask mask, Vector v) { _mm512_mask_storeu_pd(p, mask, v); }
PARITAS_VECTOR_INLINE Vector Broadcast(const double* p) { return _mm512_set1_pd(*p); }
PARITAS_VECTOR_INLINE Vector MultiplyAdd(Vector a, Vector b, Vector c) { return _mm512_fmadd_pd(a, b, c); }

#include "base/dense_tiles.inc"

#undef PARITAS_VECTOR_INLINE
#undef PARITAS_VECTOR_TARGET

}  // namespace avx512
}  // namespace

void SubtractGramLowerAvx2Fma(int m, int n, const double* x, int64_t ld_x, double* s,
                              int64_t ld_s) {
  avx2::SubtractGramLower(m, n, x, ld_x, s, ld_s);
}

void MultiplyAvx2Fma(int m, int n, int k, const double* a, int64_t ld_a, const double* b,
                     int64_t ld_b, double* out, int64_t ld_out) {
  avx2::Multiply({m, n, k, a, ld_a, b, 1, ld_b}, out, ld_out);
}

void MultiplyTransposedAvx2Fma(int m, int n, int k, const double* a, int64_t ld_a,
                               const double* b, int64_t ld_b, double* out, int64_t ld_out) {
  avx2::Multiply({m, n, k, a, ld_a, b, ld_b, 1}, out, ld_out);
}

void SubtractGramLowerAvx512(int m, int n, const double* x, int64_t ld_x, double* s,
                             int64_t ld_s) {
  avx512::SubtractGramLower(m, n, x, ld_x, s, ld_s);
}

void MultiplyAvx512(int m, int n, int k, const double* a, int64_t ld_a, const double* b,
                    int64_t ld_b, double* out, int64_t ld_out) {
  avx512::Multiply({m, n, k, a, ld_a, b, 1, ld_b}, out, ld_out);
}

void MultiplyTransposedAvx512(int m, int n, int k, const double* a, int64_t ld_a,
                              const double* b, int64_t ld_b, double* out, int64_t ld_out) {
  avx512::Multiply({m, n, k, a, ld_a, b, ld_b, 1}, out, ld_out);
}

#else  // not x86-64: the portable kernels only

bool CpuHasAvx2Fma() { return false; }

void SubtractGramLowerAvx2Fma(int, int, const double*, int64_t, double*, int64_t) { std::abort(); }

void MultiplyAvx2Fma(int, int, int, const double*, int64_t, const double*, int64_t, double*,
                     int64_t) {
  std::abort();
}

void MultiplyTransposedAvx2Fma(int, int, int, const double*, int64_t, const double*, int64_t,
                               double*, int64_t) {
  std::abort();
}

bool CpuHasAvx512() { return false; }

bool CpuPrefersAvx512() { return false; }

void SubtractGramLowerAvx512(int, int, const double*, int64_t, double*, int64_t) { std::abort(); }

void MultiplyAvx512(int, int, int, const double*, int64_t, const double*, int64_t, double*,
                    int64_t) {
  std::abort();
}

void MultiplyTransposedAvx512(int, int, int, const double*, int64_t, const double*, int64_t,
                              double*, int64_t) {
  std::abort();
}

#endif

DenseKernels ActiveDenseKernels() {
  static const DenseKernels active = [] {
    const char* forced = std::getenv(kPortableKernelsVariable);
    if (forced != nullptr && std::strcmp(forced, "unfused") == 0) return DenseKernels::kUnfused;
    // A vector path asked for by name is taken where the CPU has it and
    // ignored elsewhere (the CPU's own choice below).
    const bool avx2_asked = forced != nullptr && std::strcmp(forced, "avx2-fma") == 0;
    const bool avx512_asked = forced != nullptr && std::strcmp(forced, "avx512") == 0;
    if (avx2_asked && CpuHasAvx2Fma()) return DenseKernels::kAvx2Fma;
    if (avx512_asked && CpuHasAvx512()) return DenseKernels::kAvx512;
    if (!avx2_asked && !avx512_asked && forced != nullptr && forced[0] != '\0' &&
        std::strcmp(forced, "0") != 0) {
      return DenseKernels::kPortable;
    }
    if (CpuPrefersAvx512() && !avx2_asked) return DenseKernels::kAvx512;
    if (CpuHasAvx2Fma()) return DenseKernels::kAvx2Fma;
    return StdFmaIsOneInstruction() ? DenseKernels::kPortable : DenseKernels::kUnfused;
  }();
  return active;
}

}  // namespace paritas::internal
