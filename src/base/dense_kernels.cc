// The dense products' kernels: AVX2 + FMA ones and portable ones that give
// the same bits. Only the functions marked PARITAS_AVX2_FMA are compiled for
// AVX2; the file is built with the project's flags like every other, and
// those functions include no Eigen and call no template, so nothing here can
// replace another translation unit's copy of an inline function (see
// DEVELOPERS.md, "Vector kernels"). Every entry is one in-order chain of
// fused multiply-adds, so neither the tiling (which rows and columns share
// registers) nor the path taken changes a bit.
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

namespace {

#define PARITAS_AVX2_FMA __attribute__((target("avx2,fma")))

constexpr int kLanes = 4;        // doubles per vector
constexpr int kMaxVectors = 3;   // a tile is up to 12 rows ...
constexpr int kTileColumns = 4;  // ... by 4 columns: 12 accumulators

// Lanes below `rows` (1 to 4) on.
PARITAS_AVX2_FMA inline __m256i FirstLanes(int rows) {
  return _mm256_cmpgt_epi64(_mm256_set1_epi64x(rows), _mm256_setr_epi64x(0, 1, 2, 3));
}

// Where one tile's products come from: row i of the left factor at step p is
// a[i + p * ld_a]; column c of the right factor at step p is
// b[p * b_step + c * b_column_step].
struct TileOperands {
  const double* a;
  int64_t ld_a;
  const double* b;
  int64_t b_step;
  int64_t b_column_step;
  int depth;        // steps p = 0 .. depth - 1
  int num_columns;  // 1 to 4; missing columns repeat the last one (not stored)
  int last_rows;    // rows in the last vector, 1 to 4
  // The sums so far, when the steps continue an earlier block of them: row
  // i of column c at start[i + c * ld_start], columns below start_columns
  // (later ones repeat the last); null when the sums start at 0.
  const double* start = nullptr;
  int64_t ld_start = 0;
  int start_columns = 0;
};

// acc[v][c] = sum over p in order of a(rows 4v .. 4v + 3, p) b(p, c), one
// fused multiply-add per term. num_vectors is a constant at every call
// (ComputeTile), so
// the accumulators stay in registers.
PARITAS_AVX2_FMA inline __attribute__((always_inline)) void AccumulateTile(
    int num_vectors, const TileOperands& t, __m256d acc[kMaxVectors][kTileColumns]) {
  const __m256i last_mask = FirstLanes(t.last_rows);
  const double* b_column[kTileColumns];
  for (int c = 0; c < kTileColumns; ++c) {
    b_column[c] = t.b + (c < t.num_columns ? c : t.num_columns - 1) * t.b_column_step;
  }
  // Local sums, copied out once: stores through `acc` inside the loop would
  // not be sunk out of it. A chain continued from stored sums goes on from
  // the same doubles, so blocks of steps give the bits of one pass.
  __m256d sum[kMaxVectors][kTileColumns];
  for (int v = 0; v < kMaxVectors; ++v) {
    for (int c = 0; c < kTileColumns; ++c) sum[v][c] = _mm256_setzero_pd();
  }
  if (t.start != nullptr) {
    for (int c = 0; c < kTileColumns; ++c) {
      const double* column =
          t.start + (c < t.start_columns ? c : t.start_columns - 1) * t.ld_start;
      for (int v = 0; v < num_vectors; ++v) {
        sum[v][c] = v + 1 < num_vectors ? _mm256_loadu_pd(column + kLanes * v)
                                        : _mm256_maskload_pd(column + kLanes * v, last_mask);
      }
    }
  }
  for (int p = 0; p < t.depth; ++p) {
    const double* a_p = t.a + p * t.ld_a;
    __m256d a_v[kMaxVectors];
    for (int v = 0; v < num_vectors; ++v) {
      a_v[v] = v + 1 < num_vectors ? _mm256_loadu_pd(a_p + kLanes * v)
                                   : _mm256_maskload_pd(a_p + kLanes * v, last_mask);
    }
    const int64_t b_offset = p * t.b_step;
    for (int c = 0; c < kTileColumns; ++c) {
      const __m256d b_pc = _mm256_broadcast_sd(b_column[c] + b_offset);
      for (int v = 0; v < num_vectors; ++v) sum[v][c] = _mm256_fmadd_pd(a_v[v], b_pc, sum[v][c]);
    }
  }
  for (int v = 0; v < kMaxVectors; ++v) {
    for (int c = 0; c < kTileColumns; ++c) acc[v][c] = sum[v][c];
  }
}

// Stores a tile's first `num_columns` columns to `out` (column stride
// ld_out): each column's vectors whole but the last, masked to the tile's
// rows (`last_mask`).
PARITAS_AVX2_FMA inline __attribute__((always_inline)) void StoreTile(
    const __m256d acc[kMaxVectors][kTileColumns], int num_vectors, int num_columns,
    __m256i last_mask, double* out, int64_t ld_out) {
  for (int c = 0; c < num_columns; ++c) {
    double* column = out + c * ld_out;
    for (int v = 0; v + 1 < num_vectors; ++v) _mm256_storeu_pd(column + kLanes * v, acc[v][c]);
    _mm256_maskstore_pd(column + kLanes * (num_vectors - 1), last_mask, acc[num_vectors - 1][c]);
  }
}

// AccumulateTile with the number of vectors as a constant.
PARITAS_AVX2_FMA void ComputeTile(int num_vectors, const TileOperands& t,
                                  __m256d acc[kMaxVectors][kTileColumns]) {
  switch (num_vectors) {
    case 1:
      AccumulateTile(1, t, acc);
      break;
    case 2:
      AccumulateTile(2, t, acc);
      break;
    default:
      AccumulateTile(3, t, acc);
      break;
  }
}

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

// Steps of the sums per block: a 12-row tile of a (24 KiB) stays in the L1
// cache and a panel of b in the L2 cache however long the sums are; the
// sums of one block go on from those of the last (see TileOperands::start).
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

// Doubles MultiplyTiles' `packed` holds for a product of depth k and n columns.
size_t PackedSize(int n, int k) {
  const int depth = k < kDepthBlock ? k : kDepthBlock;
  return static_cast<size_t>(PanelColumns(n, k) + kLanes * kMaxVectors) * depth;
}

// out = a b. Both operands are copied into contiguous tiles first (b by
// panels of PanelColumns columns, held in the L2 cache; a by tiles of 12
// rows, in the L1 cache, each passing over a whole panel), a block of
// kDepthBlock steps at a time: strided operands (3,000 regions apart) would
// otherwise touch a page per step of the sum, and long sums would not stay
// in the caches. Copies change no value, and each entry is still one chain
// in order (a block goes on from the sums the last one stored in out).
// `packed` holds PackedSize(n, k) doubles.
PARITAS_AVX2_FMA void MultiplyTiles(const ProductOperands& x, double* packed, double* out,
                                    int64_t ld_out) {
  constexpr int kTileRows = kLanes * kMaxVectors;
  const int m = x.m, n = x.n, k = x.k;
  const int panel = PanelColumns(n, k);
  __m256d acc[kMaxVectors][kTileColumns];
  for (int k0 = 0; k0 < k; k0 += kDepthBlock) {
    const int depth = k - k0 < kDepthBlock ? k - k0 : kDepthBlock;
    double* packed_a = packed + static_cast<int64_t>(panel) * depth;
    for (int p0 = 0; p0 < n; p0 += panel) {
      const int p1 = n - p0 < panel ? n : p0 + panel;
      // Column group g of the panel at packed + g * 4 depth, step p at
      // [4p + c]; a missing last column repeats the one before (never stored).
      for (int j0 = p0; j0 < p1; j0 += kTileColumns) {
        double* group = packed + static_cast<int64_t>(j0 - p0) * depth;
        for (int c = 0; c < kTileColumns; ++c) {
          const int j = j0 + c < p1 ? j0 + c : p1 - 1;
          const double* column = x.b + j * x.b_column_step + k0 * x.b_step;
          for (int p = 0; p < depth; ++p) group[kTileColumns * p + c] = column[p * x.b_step];
        }
      }
      for (int i0 = 0; i0 < m; i0 += kTileRows) {
        const int rows = m - i0 < kTileRows ? m - i0 : kTileRows;
        const int num_vectors = (rows + kLanes - 1) / kLanes;
        const int last_rows = rows - kLanes * (num_vectors - 1);
        const __m256i last_mask = FirstLanes(last_rows);
        for (int p = 0; p < depth; ++p) {
          const double* source = x.a + i0 + (k0 + p) * x.ld_a;
          for (int r = 0; r < kTileRows; ++r) {
            packed_a[kTileRows * p + r] = r < rows ? source[r] : 0.0;
          }
        }
        for (int j0 = p0; j0 < p1; j0 += kTileColumns) {
          const int num_columns = p1 - j0 < kTileColumns ? p1 - j0 : kTileColumns;
          double* tile_out = out + i0 + j0 * ld_out;
          const TileOperands t{.a = packed_a,
                               .ld_a = kTileRows,
                               .b = packed + static_cast<int64_t>(j0 - p0) * depth,
                               .b_step = kTileColumns,
                               .b_column_step = 1,
                               .depth = depth,
                               .num_columns = kTileColumns,
                               .last_rows = last_rows,
                               .start = k0 > 0 ? tile_out : nullptr,
                               .ld_start = ld_out,
                               .start_columns = num_columns};
          ComputeTile(num_vectors, t, acc);
          StoreTile(acc, num_vectors, num_columns, last_mask, tile_out, ld_out);
        }
      }
    }
  }
}

// MultiplyTiles with its buffer, kept by the thread between calls (at most
// about 220 KiB: the blocks bound it), so the CPD's products per heading
// allocate nothing. Compiled for the build's target: it calls the standard
// library.
void Multiply(const ProductOperands& x, double* out, int64_t ld_out) {
  if (x.k == 0) {  // a and b may then be null
    ClearColumns(x.m, x.n, out, ld_out);
    return;
  }
  if (x.m == 0 || x.n == 0) return;
  thread_local std::vector<double> packed;
  const size_t size = PackedSize(x.n, x.k);
  if (packed.size() < size) packed.resize(size);
  MultiplyTiles(x, packed.data(), out, ld_out);
}

// SubtractGramLowerAvx2Fma a block of kDepthBlock steps at a time, so the
// columns of x a tile passes over stay in the L2 cache however long the
// sums are. The sums of the blocks before the last are kept in `partial`
// (m x m, the lower triangle's tiles), the last block's go on from them and
// are subtracted from s: the same chains as in one pass.
PARITAS_AVX2_FMA void SubtractGramLowerTiles(int m, int n, const double* x, int64_t ld_x,
                                             double* partial, double* s, int64_t ld_s) {
  constexpr int kTileRows = kLanes * kMaxVectors;
  __m256d acc[kMaxVectors][kTileColumns];
  alignas(32) double sums[kMaxVectors * kLanes * kTileColumns];
  for (int k0 = 0; k0 < n; k0 += kDepthBlock) {
    const int depth = n - k0 < kDepthBlock ? n - k0 : kDepthBlock;
    const bool last_block = k0 + depth == n;
    for (int j0 = 0; j0 < m; j0 += kTileColumns) {
      const int num_columns = m - j0 < kTileColumns ? m - j0 : kTileColumns;
      // Row tiles start on the diagonal; the tile's entries above it are
      // computed and dropped.
      for (int i0 = j0; i0 < m; i0 += kTileRows) {
        const int rows = m - i0 < kTileRows ? m - i0 : kTileRows;
        const int num_vectors = (rows + kLanes - 1) / kLanes;
        const int last_rows = rows - kLanes * (num_vectors - 1);
        // Only sums longer than one block have a buffer (partial may be null).
        double* tile_partial =
            n > kDepthBlock ? partial + i0 + static_cast<int64_t>(j0) * m : nullptr;
        const TileOperands t{.a = x + i0 + k0 * ld_x,
                             .ld_a = ld_x,
                             .b = x + j0 + k0 * ld_x,
                             .b_step = ld_x,
                             .b_column_step = 1,
                             .depth = depth,
                             .num_columns = num_columns,
                             .last_rows = last_rows,
                             .start = k0 > 0 ? tile_partial : nullptr,
                             .ld_start = m,
                             .start_columns = num_columns};
        ComputeTile(num_vectors, t, acc);
        if (!last_block) {
          StoreTile(acc, num_vectors, num_columns, FirstLanes(last_rows), tile_partial, m);
          continue;
        }
        for (int v = 0; v < num_vectors; ++v) {
          for (int c = 0; c < kTileColumns; ++c)
            _mm256_store_pd(sums + (c * kMaxVectors + v) * kLanes, acc[v][c]);
        }
        for (int c = 0; c < num_columns; ++c) {
          const int j = j0 + c;
          for (int r = j > i0 ? j - i0 : 0; r < rows; ++r)
            s[i0 + r + j * ld_s] -= sums[c * kTileRows + r];
        }
      }
    }
  }
}

}  // namespace

void SubtractGramLowerAvx2Fma(int m, int n, const double* x, int64_t ld_x, double* s,
                              int64_t ld_s) {
  if (n == 0) return;  // s - 0 is s, -0 included; x may then be null
  // The partial sums (m x m): kept by the thread between calls up to
  // kKeptPartialDoubles (the CPD's and the screen's m is the smaller side of
  // a heading, 50 on the benchmark surveys), freed after the call beyond it
  // (a heading of thousands of regions and items would otherwise leave each
  // thread tens of megabytes).
  constexpr size_t kKeptPartialDoubles = size_t{1} << 17;  // 1 MiB
  const size_t size = n > kDepthBlock ? static_cast<size_t>(m) * m : 0;
  thread_local std::vector<double> kept;
  std::vector<double> large;
  std::vector<double>& partial = size <= kKeptPartialDoubles ? kept : large;
  if (partial.size() < size) partial.resize(size);
  SubtractGramLowerTiles(m, n, x, ld_x, partial.data(), s, ld_s);
}

void MultiplyAvx2Fma(int m, int n, int k, const double* a, int64_t ld_a, const double* b,
                     int64_t ld_b, double* out, int64_t ld_out) {
  Multiply({m, n, k, a, ld_a, b, 1, ld_b}, out, ld_out);
}

void MultiplyTransposedAvx2Fma(int m, int n, int k, const double* a, int64_t ld_a,
                               const double* b, int64_t ld_b, double* out, int64_t ld_out) {
  Multiply({m, n, k, a, ld_a, b, ld_b, 1}, out, ld_out);
}

#undef PARITAS_AVX2_FMA

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

#endif

DenseKernels ActiveDenseKernels() {
  static const DenseKernels active = [] {
    const char* forced = std::getenv(kPortableKernelsVariable);
    if (forced != nullptr && std::strcmp(forced, "unfused") == 0) return DenseKernels::kUnfused;
    if (forced != nullptr && forced[0] != '\0' && std::strcmp(forced, "0") != 0) {
      return DenseKernels::kPortable;
    }
    if (CpuHasAvx2Fma()) return DenseKernels::kAvx2Fma;
    return StdFmaIsOneInstruction() ? DenseKernels::kPortable : DenseKernels::kUnfused;
  }();
  return active;
}

}  // namespace paritas::internal
