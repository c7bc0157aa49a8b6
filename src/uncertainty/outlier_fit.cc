// The screen's fit solves the CPD normal equations by the block elimination
// FitCpd uses, with one factorisation per weighted fit serving both the fit
// and what a screen needs and a parity does not: hat values. It also finds
// the cells that alone link part of a heading, whose residual says nothing.
#include "uncertainty/outlier_fit.h"

#include <Eigen/Cholesky>
#include <algorithm>
#include <array>
#include <atomic>
#include <bit>
#include <cmath>
#include <limits>
#include <utility>
#include <vector>

#if defined(__x86_64__)
#include <immintrin.h>
#endif

#include "base/dense_kernels.h"
#include "base/dense_products.h"
#include "base/not_a_number.h"

namespace paritas::internal {
namespace {

// 1 / Phi^-1(3/4): makes the median absolute deviation a consistent estimate
// of a normal standard deviation (Hampel 1974).
constexpr double kMadToSigma = 1.4826;
// Hat values closer to 1 than this carry no usable residual (rounding only);
// exact 1s are found on the graph.
constexpr double kHatOne = 1e-9;

// Digits of the radix selection below: 12 bits at a time from the top (the
// exponent first), then the last 4.
struct RadixDigit {
  int shift, width;
};
constexpr RadixDigit kRadixDigits[] = {{52, 12}, {40, 12}, {28, 12}, {16, 12}, {4, 12}, {0, 4}};
constexpr int kNumRadixDigits = static_cast<int>(std::size(kRadixDigits));
constexpr int kRadixBuckets = 1 << 12;
// Candidates few enough to be sorted rather than counted by a further digit
// (a digit's pass clears and sums 4,096 tallies whatever the candidates).
constexpr size_t kSortedCandidates = 32;

int RadixDigitOf(uint64_t x, int level) {
  const RadixDigit& d = kRadixDigits[level];
  return static_cast<int>((x >> d.shift) & ((uint64_t{1} << d.width) - 1));
}

// Counts `values` per digit of `level` into count[0 .. kRadixBuckets). Four
// tallies take turns, so that values sharing a digit (most do, in the
// exponent) do not wait on each other's increments.
void CountRadixDigits(std::span<const uint64_t> values, int level, std::vector<uint32_t>* tallies,
                      uint32_t* count) {
  const size_t n = values.size();
  const int ways = n >= 4 * kRadixBuckets ? 4 : 1;
  tallies->assign(static_cast<size_t>(ways) * kRadixBuckets, 0u);
  uint32_t* tally = tallies->data();
  size_t k = 0;
  if (ways == 4) {
    for (; k + 4 <= n; k += 4) {
      ++tally[RadixDigitOf(values[k], level)];
      ++tally[kRadixBuckets + RadixDigitOf(values[k + 1], level)];
      ++tally[2 * kRadixBuckets + RadixDigitOf(values[k + 2], level)];
      ++tally[3 * kRadixBuckets + RadixDigitOf(values[k + 3], level)];
    }
  }
  for (; k < n; ++k) ++tally[RadixDigitOf(values[k], level)];
  for (int d = 0; d < kRadixBuckets; ++d) {
    uint32_t sum = tally[d];
    for (int w = 1; w < ways; ++w) sum += tally[w * kRadixBuckets + d];
    count[d] = sum;
  }
}


// Cells grouped by one index (counting sort): cells of group g are
// order[start[g] .. start[g + 1]).
struct Groups {
  std::vector<int> start;
  std::vector<int> order;
};

Groups GroupBy(std::span<const int> index, int num_groups) {
  Groups groups;
  groups.start.assign(num_groups + 1, 0);
  for (int g : index) ++groups.start[g + 1];
  for (int g = 0; g < num_groups; ++g) groups.start[g + 1] += groups.start[g];
  groups.order.resize(index.size());
  std::vector<int> next(groups.start.begin(), groups.start.end() - 1);
  for (size_t k = 0; k < index.size(); ++k) groups.order[next[index[k]]++] = static_cast<int>(k);
  return groups;
}

// The regions and items present, renumbered 0.. in order.
struct Compressed {
  int num_regions = 0;
  int num_items = 0;
  std::vector<int> region;  // per cell
  std::vector<int> item;
  std::vector<int> region_of;  // compressed -> CpdData index
  std::vector<int> item_of;
};

Compressed Compress(const CpdData& data) {
  Compressed c;
  std::vector<int> region_index(data.num_regions, -1), item_index(data.num_items, -1);
  for (size_t k = 0; k < data.region.size(); ++k) {
    region_index[data.region[k]] = 0;
    item_index[data.item[k]] = 0;
  }
  for (int r = 0; r < data.num_regions; ++r) {
    if (region_index[r] < 0) continue;
    region_index[r] = static_cast<int>(c.region_of.size());
    c.region_of.push_back(r);
  }
  for (int i = 0; i < data.num_items; ++i) {
    if (item_index[i] < 0) continue;
    item_index[i] = static_cast<int>(c.item_of.size());
    c.item_of.push_back(i);
  }
  c.num_regions = static_cast<int>(c.region_of.size());
  c.num_items = static_cast<int>(c.item_of.size());
  c.region.resize(data.region.size());
  c.item.resize(data.item.size());
  for (size_t k = 0; k < data.region.size(); ++k) {
    c.region[k] = region_index[data.region[k]];
    c.item[k] = item_index[data.item[k]];
  }
  return c;
}

// Sets the Huber weight of each cell, min(1, c s / |e|) (Huber 1981), and
// returns the largest change from `previous`, from cell `begin_at` on (the
// weights before it are set by the caller). A block of cells at a time
// (kHuberBlock, in the L1 cache for the three loops over it): the quotient
// is formed for every cell and then chosen, in loops that each run on
// vectors.
double HuberWeightsFrom(const Eigen::VectorXd& residual, double cutoff, const Eigen::VectorXd& previous,
                        int64_t begin_at, Eigen::VectorXd* weight) {
  constexpr int64_t kHuberBlock = 512;
  const int64_t n = residual.size();
  double change = 0.0;
  for (int64_t begin = begin_at; begin < n; begin += kHuberBlock) {
    const int64_t size = std::min(kHuberBlock, n - begin);
    const double* e = residual.data() + begin;
    double* w = weight->data() + begin;
    for (int64_t k = 0; k < size; ++k) w[k] = cutoff / std::abs(e[k]);
    for (int64_t k = 0; k < size; ++k) w[k] = std::abs(e[k]) > cutoff ? w[k] : 1.0;
    change = std::max(change, (weight->segment(begin, size) - previous.segment(begin, size)).cwiseAbs().maxCoeff());
  }
  return change;
}

#if defined(__x86_64__)
#if defined(__GNUC__) && !defined(__clang__)
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wmaybe-uninitialized"
#endif
// HuberWeightsFrom on the cells of whole vectors of 8, where the dense
// products run on AVX-512: the weights of cells [0, n - n % 8) of `e`
// (residuals) into `w`, their largest change from `before` into *change;
// the same correctly rounded quotients, the same choice (a NaN residual
// gets weight 1 either way), and a largest change that does not depend on
// the order its candidates are compared in (all finite). Returns the number
// of cells done.
__attribute__((target("avx512f,avx2,fma"))) int64_t HuberWeightsAvx512(const double* e, const double* before,
                                                                       int64_t n, double cutoff, double* w,
                                                                       double* change) {
  const __m512d limit = _mm512_set1_pd(cutoff), one = _mm512_set1_pd(1.0);
  __m512d largest = _mm512_setzero_pd();
  int64_t k = 0;
  for (; k + 8 <= n; k += 8) {
    const __m512d size = _mm512_abs_pd(_mm512_loadu_pd(e + k));
    const __m512d quotient = _mm512_div_round_pd(limit, size, _MM_FROUND_CUR_DIRECTION);
    const __m512d chosen = _mm512_mask_blend_pd(_mm512_cmp_pd_mask(size, limit, _CMP_GT_OQ), one, quotient);
    _mm512_storeu_pd(w + k, chosen);
    const __m512d step =
        _mm512_abs_pd(_mm512_sub_round_pd(chosen, _mm512_loadu_pd(before + k), _MM_FROUND_CUR_DIRECTION));
    largest = _mm512_max_pd(largest, step);
  }
  alignas(64) double lanes[8];
  _mm512_store_pd(lanes, largest);
  // The registers' upper halves cleared before the scalar code that
  // follows (the compiler clears them on its own paths out, but once left
  // them set on a path through a call, and the screen's scalar code after
  // it ran a third slower; see DEVELOPERS.md).
  _mm256_zeroupper();
  double most = lanes[0];
  for (int j = 1; j < 8; ++j) most = lanes[j] > most ? lanes[j] : most;
  *change = most;
  return k;
}
#if defined(__GNUC__) && !defined(__clang__)
#pragma GCC diagnostic pop
#endif
#endif

// Whether the screen's per-cell passes run on vectors (EnableVectorCellPasses).
std::atomic<bool> vector_cell_passes{true};

#if defined(__x86_64__)
// Whether they do now: where the dense products run on AVX-512, unless a
// test turned them off.
bool UseVectorCellPasses() {
  return ActiveDenseKernels() == DenseKernels::kAvx512 && vector_cell_passes.load(std::memory_order_relaxed);
}
#endif

// Sets the Huber weights into `weight` and returns the largest change (see
// HuberWeightsFrom), on vectors of 8 cells where the dense products run on
// AVX-512.
double HuberWeights(const Eigen::VectorXd& residual, double cutoff, const Eigen::VectorXd& previous,
                    Eigen::VectorXd* weight) {
  const int64_t n = residual.size();
  weight->resize(n);
  int64_t done = 0;
  double change = 0.0;
#if defined(__x86_64__)
  if (UseVectorCellPasses()) {
    done = HuberWeightsAvx512(residual.data(), previous.data(), n, cutoff, weight->data(), &change);
  }
#endif
  return done < n ? std::max(change, HuberWeightsFrom(residual, cutoff, previous, done, weight)) : change;
}

// Cells of RobustScale's terms formed at a time, as one Eigen array
// expression (square roots and quotients on vectors) into a buffer that
// stays in the L1 cache while the cells kept are picked from it.
constexpr int64_t kTermBlock = 512;
// Half-width of the window around the previous median, relative to it.
constexpr double kGuessWindow = 1.0 / 64.0;
// How much wider than the window the test without square roots looks
// (relative): far beyond its roundings (a few units of 1e-16).
constexpr double kSureMargin = 1e-6;
// Windows beyond these bounds are not used (the squares below could
// leave the normal range of doubles).
constexpr double kSmallestGuess = 1e-100, kLargestGuess = 1e100;

// KeepTerms from cell `begin_at` on, the first `n` cells kept already in
// `kept`; returns the number kept in all.
size_t KeepTermsFrom(const Eigen::VectorXd& residual, const Eigen::VectorXd& weight, const Eigen::VectorXd& leverage,
                     const std::vector<CellLink>& link, int64_t begin_at, size_t n, uint64_t* kept) {
  const int64_t num_all = residual.size();
  const double* w = weight.data();
  const double* q = leverage.data();
  Eigen::Array<double, kTermBlock, 1> block;
  for (int64_t begin = begin_at; begin < num_all; begin += kTermBlock) {
    const int64_t size = std::min(kTermBlock, num_all - begin);
    // Each quotient and root correctly rounded, so the same bits as one at
    // a time; NaN or infinity where h >= 1, not kept.
    block.head(size) = residual.segment(begin, size).array().abs() /
                       (1.0 - weight.segment(begin, size).array() * leverage.segment(begin, size).array()).sqrt();
    for (int64_t j = 0; j < size; ++j) {
      const int64_t k = begin + j;
      kept[n] = std::bit_cast<uint64_t>(block[j]);
      n += link[k] == CellLink::kNone && w[k] * q[k] < 1.0 - kHatOne ? 1 : 0;
    }
  }
  return n;
}

#if defined(__x86_64__)
#if defined(__GNUC__) && !defined(__clang__)
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wmaybe-uninitialized"
#endif
// KeepTermsFrom on the cells of whole vectors of 8 (of `num_all`), where the
// dense products run on AVX-512: the same products, differences, roots and
// quotients, each correctly rounded (explicitly rounded intrinsics), and
// the terms of the cells kept packed in cell order. Sets *n to the cells
// kept and returns the number of cells done. `kept` has room for every
// cell: the 8 lanes stored at kept + *n never pass cell k + 8.
__attribute__((target("avx512f,avx2,fma"))) int64_t KeepTermsAvx512(int64_t num_all, const double* e, const double* w,
                                                                    const double* q, const uint8_t* link,
                                                                    uint64_t* kept, size_t* n) {
  constexpr int kRound = _MM_FROUND_CUR_DIRECTION;
  const __m512d one = _mm512_set1_pd(1.0), hat_limit = _mm512_set1_pd(1.0 - kHatOne);
  size_t num_kept = 0;
  int64_t k = 0;
  for (; k + 8 <= num_all; k += 8) {
    const __m512d h = _mm512_mul_round_pd(_mm512_loadu_pd(w + k), _mm512_loadu_pd(q + k), kRound);
    const __m512d root = _mm512_sqrt_round_pd(_mm512_sub_round_pd(one, h, kRound), kRound);
    const __m512d term = _mm512_div_round_pd(_mm512_abs_pd(_mm512_loadu_pd(e + k)), root, kRound);
    const __m512i links = _mm512_cvtepu8_epi64(_mm_loadl_epi64(reinterpret_cast<const __m128i*>(link + k)));
    const __mmask8 keep = static_cast<__mmask8>(_mm512_cmpeq_epi64_mask(links, _mm512_setzero_si512()) &
                                                _mm512_cmp_pd_mask(h, hat_limit, _CMP_LT_OQ));
    _mm512_storeu_si512(kept + num_kept, _mm512_maskz_compress_epi64(keep, _mm512_castpd_si512(term)));
    num_kept += static_cast<size_t>(__builtin_popcount(keep));
  }
  _mm256_zeroupper();  // before the scalar code that follows (see HuberWeightsAvx512)
  *n = num_kept;
  return k;
}
#if defined(__GNUC__) && !defined(__clang__)
#pragma GCC diagnostic pop
#endif
#endif

// Sets the terms |e| / sqrt(1 - w q) of the cells kept (link kNone, w q
// below 1 - kHatOne) into `kept` (sized for every cell), in cell order, and
// returns their number; on vectors of 8 cells where the dense products run
// on AVX-512 (the same terms).
size_t KeepTerms(const Eigen::VectorXd& residual, const Eigen::VectorXd& weight, const Eigen::VectorXd& leverage,
                 const std::vector<CellLink>& link, uint64_t* kept) {
  static_assert(sizeof(CellLink) == 1 && static_cast<int>(CellLink::kNone) == 0);
  int64_t done = 0;
  size_t n = 0;
#if defined(__x86_64__)
  if (UseVectorCellPasses()) {
    done = KeepTermsAvx512(residual.size(), residual.data(), weight.data(), leverage.data(),
                           reinterpret_cast<const uint8_t*>(link.data()), kept, &n);
  }
#endif
  return KeepTermsFrom(residual, weight, leverage, link, done, n, kept);
}

// Where the terms lie against a window [lo, hi] of bit patterns: how many
// are below it, and those inside it.
struct WindowTally {
  uint64_t lo = 0, hi = 0;
  size_t num_below = 0;
  size_t num_near = 0;  // their bit patterns in the caller's buffer
};

// Places the term |e| / sqrt(d) of a kept cell whose square did not settle
// its side of the window: formed as KeepTerms forms it, counted below the
// window or set into `near` (counted when inside it).
inline void PlaceFormedTerm(double e, double d, const WindowTally& window, size_t* num_below,
                            uint64_t* near, size_t* num_near) {
  const uint64_t x = std::bit_cast<uint64_t>(std::abs(e) / std::sqrt(d));
  *num_below += x < window.lo ? 1 : 0;
  near[*num_near] = x;
  *num_near += x >= window.lo && x <= window.hi ? 1 : 0;
}

// The pointers and bounds of one tally: cells [0, num_all) with residual e,
// weight w, leverage q and link; the squares' bounds below and above the
// window (see TallyAgainstWindow).
struct TallyInput {
  int64_t num_all;
  const double* e;
  const double* w;
  const double* q;
  const uint8_t* link;  // CellLink values, kNone = 0
  double below_square, above_square;
};

// TallyAgainstWindow's loop over cells [begin, num_all), adding to the
// counts; returns the number of cells kept. Never inlined: inside
// TallyCellsAvx512 (its last cells) it would be compiled for a CPU with FMA,
// where 1 - w q may be contracted into one fused multiply-add.
__attribute__((noinline)) size_t TallyCells(const TallyInput& in, int64_t begin, uint64_t* near, WindowTally* window, size_t* num_below,
                  size_t* num_near) {
  size_t n = 0;
  // The tests combine as integers, so that the only branch is the rare one.
  for (int64_t k = begin; k < in.num_all; ++k) {
    const double h = in.w[k] * in.q[k];
    const double d = 1.0 - h;
    const double square = in.e[k] * in.e[k];
    const size_t keep = static_cast<size_t>(in.link[k] == 0) & static_cast<size_t>(h < 1.0 - kHatOne);
    const size_t below = static_cast<size_t>(square < d * in.below_square);
    const size_t above = static_cast<size_t>(square > d * in.above_square);
    n += keep;
    *num_below += keep & below;
    if ((keep & ~below & ~above) != 0) [[unlikely]] {
      PlaceFormedTerm(in.e[k], d, *window, num_below, near, num_near);
    }
  }
  return n;
}

#if defined(__x86_64__)
// GCC 12's AVX-512 headers start some results from a self-initialised
// "undefined" vector, which its -Wmaybe-uninitialized reports where they
// are inlined.
#if defined(__GNUC__) && !defined(__clang__)
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wmaybe-uninitialized"
#endif
// TallyCells on 8 cells at a time, for the CPUs whose dense products run on
// AVX-512: the same products, differences and comparisons, each correctly
// rounded (the explicitly rounded intrinsics, which no compiler contracts
// into a fused multiply-add), so the same counts and terms; the last cells
// one by one. Returns the number of cells kept.
__attribute__((target("avx512f,avx2,fma"))) size_t TallyCellsAvx512(const TallyInput& in, uint64_t* near,
                                                                      WindowTally* window, size_t* num_below,
                                                                      size_t* num_near) {
  constexpr int kRound = _MM_FROUND_CUR_DIRECTION;
  const __m512d one = _mm512_set1_pd(1.0), hat_limit = _mm512_set1_pd(1.0 - kHatOne);
  const __m512d below_square = _mm512_set1_pd(in.below_square), above_square = _mm512_set1_pd(in.above_square);
  size_t n = 0;
  int64_t k = 0;
  for (; k + 8 <= in.num_all; k += 8) {
    const __m512d e = _mm512_loadu_pd(in.e + k);
    const __m512d h = _mm512_mul_round_pd(_mm512_loadu_pd(in.w + k), _mm512_loadu_pd(in.q + k), kRound);
    const __m512d d = _mm512_sub_round_pd(one, h, kRound);
    const __m512d square = _mm512_mul_round_pd(e, e, kRound);
    const __m512i links = _mm512_cvtepu8_epi64(_mm_loadl_epi64(reinterpret_cast<const __m128i*>(in.link + k)));
    const unsigned keep = _mm512_cmpeq_epi64_mask(links, _mm512_setzero_si512()) &
                          _mm512_cmp_pd_mask(h, hat_limit, _CMP_LT_OQ);
    const unsigned below =
        _mm512_cmp_pd_mask(square, _mm512_mul_round_pd(d, below_square, kRound), _CMP_LT_OQ);
    const unsigned above =
        _mm512_cmp_pd_mask(square, _mm512_mul_round_pd(d, above_square, kRound), _CMP_GT_OQ);
    n += static_cast<size_t>(__builtin_popcount(keep));
    *num_below += static_cast<size_t>(__builtin_popcount(keep & below));
    unsigned formed = keep & ~below & ~above;
    if (formed != 0) [[unlikely]] {
      alignas(64) double d_lanes[8];
      _mm512_store_pd(d_lanes, d);
      for (; formed != 0; formed &= formed - 1) {
        const int j = __builtin_ctz(formed);
        PlaceFormedTerm(in.e[k + j], d_lanes[j], *window, num_below, near, num_near);
      }
    }
  }
  return n + TallyCells(in, k, near, window, num_below, num_near);
}
#if defined(__GNUC__) && !defined(__clang__)
#pragma GCC diagnostic pop
#endif
#endif

// Tallies the terms of the cells kept (as KeepTerms) against `window`,
// setting those inside it into `near` (sized for every cell), and returns
// the number of cells kept. Most terms are placed without being formed: a
// term t = |e| / sqrt(d), d = 1 - w q, lies below lo when e^2 < d lo^2 and
// above hi when e^2 > d hi^2, each bound moved outwards by kSureMargin so
// that no rounding can reverse the answer; the few terms in between are
// formed as KeepTerms forms them and placed exactly. On vectors of 8 cells
// where the dense products run on AVX-512 (the same counts and terms).
size_t TallyAgainstWindow(const Eigen::VectorXd& residual, const Eigen::VectorXd& weight,
                          const Eigen::VectorXd& leverage, const std::vector<CellLink>& link, uint64_t* near,
                          WindowTally* window) {
  const double sure_below = std::bit_cast<double>(window->lo) * (1.0 - kSureMargin);
  const double sure_above = std::bit_cast<double>(window->hi) * (1.0 + kSureMargin);
  static_assert(sizeof(CellLink) == 1 && static_cast<int>(CellLink::kNone) == 0);
  const TallyInput in{residual.size(), residual.data(), weight.data(), leverage.data(),
                      reinterpret_cast<const uint8_t*>(link.data()), sure_below * sure_below,
                      sure_above * sure_above};
  size_t num_below = 0, num_near = 0, n = 0;
#if defined(__x86_64__)
  if (UseVectorCellPasses()) {
    n = TallyCellsAvx512(in, near, window, &num_below, &num_near);
  } else {
    n = TallyCells(in, 0, near, window, &num_below, &num_near);
  }
#else
  n = TallyCells(in, 0, near, window, &num_below, &num_near);
#endif
  window->num_below = num_below;
  window->num_near = num_near;
  return n;
}

// The median of `num_terms` terms from the window's tally when the middle
// term (and for an even count the one below it) lies inside the window:
// the same value as sorting gives, the middle term or the mean of the two
// middle terms. NaN otherwise.
double MedianInWindow(size_t num_terms, const WindowTally& window, uint64_t* near) {
  const size_t rank = num_terms / 2;
  const size_t first = num_terms % 2 == 0 ? rank - 1 : rank;  // lowest rank needed
  if (rank >= num_terms || first < window.num_below || rank - window.num_below >= window.num_near) return kNaN;
  const size_t at = rank - window.num_below;
  std::nth_element(near, near + at, near + window.num_near);
  const double upper = std::bit_cast<double>(near[at]);
  if (num_terms % 2 == 1) return upper;
  return 0.5 * (upper + std::bit_cast<double>(*std::max_element(near, near + at)));
}

}  // namespace

void EnableVectorCellPasses(bool enabled) { vector_cell_passes.store(enabled, std::memory_order_relaxed); }

// A non-negative double orders as its bit pattern, so the middle value is
// found by radix selection: the candidates are counted per digit and those
// in the digit bucket holding the rank sought are kept (a branch-free
// compaction), digit by digit from the top, until at most 32 are left,
// which are sorted; no other comparison depends on the data. For an even
// count, the value just below the middle is the middle's bucket mate of one
// rank less or, when the middle is the lowest of its bucket, the largest
// candidate of the buckets below it.
double MedianOfNonNegative(const std::vector<uint64_t>& bits, ScaleScratch* scratch) {
  const size_t n = bits.size();
  size_t rank = n / 2;  // rank sought among the candidates left
  bool find_lower = n % 2 == 0 && n > 1;
  uint64_t lower = 0;
  std::array<uint32_t, kRadixBuckets> count;
  std::span<const uint64_t> left(bits);
  for (int level = 0; level < kNumRadixDigits && left.size() > kSortedCandidates; ++level) {
    CountRadixDigits(left, level, &scratch->tallies, count.data());
    int digit = 0;
    while (rank >= count[digit]) rank -= count[digit++];
    if (find_lower && rank == 0) {
      // The value below is in the buckets below: their largest.
      for (uint64_t x : left) lower = RadixDigitOf(x, level) < digit && x > lower ? x : lower;
      find_lower = false;
    }
    if (count[digit] == left.size()) continue;  // all share this digit
    scratch->candidates.resize(std::max(scratch->candidates.size(), left.size()));  // never beyond n
    uint64_t* out = scratch->candidates.data();
    size_t kept = 0;
    for (uint64_t x : left) {
      out[kept] = x;
      kept += RadixDigitOf(x, level) == digit ? 1 : 0;
    }
    left = std::span<const uint64_t>(out, kept);
  }
  // The few candidates left (or, after the last digit, copies of the middle
  // value) are sorted; the middle value has rank `rank` among them and, when
  // still to find, its mate of one rank less is the one before it (rank >= 1
  // then: a rank of 0 sends the search for the mate to the buckets below).
  std::array<uint64_t, kSortedCandidates> sorted;
  const size_t num_left = std::min(left.size(), sorted.size());
  std::copy(left.begin(), left.begin() + static_cast<std::ptrdiff_t>(num_left), sorted.begin());
  std::sort(sorted.begin(), sorted.begin() + static_cast<std::ptrdiff_t>(num_left));
  const size_t at = std::min(rank, num_left - 1);
  const double upper = std::bit_cast<double>(sorted[at]);
  if (n % 2 == 1) return upper;
  return 0.5 * (upper + std::bit_cast<double>(find_lower ? sorted[at - 1] : lower));
}

double RobustScale(const Eigen::VectorXd& residual, const Eigen::VectorXd& weight,
                   const Eigen::VectorXd& leverage, const std::vector<CellLink>& link,
                   ScaleScratch* scratch, int* num_cells) {
  // With a guess (the previous median of the same fit, which moves little
  // from one reweighting to the next), the terms are first tallied against
  // a window around it; when the middle lies inside, it is selected among
  // the few there.
  const double guess = scratch->median_guess;
  if (guess >= kSmallestGuess && guess <= kLargestGuess) {
    WindowTally window;
    window.lo = std::bit_cast<uint64_t>(guess * (1.0 - kGuessWindow));
    window.hi = std::bit_cast<uint64_t>(guess * (1.0 + kGuessWindow));
    scratch->candidates.resize(std::max(scratch->candidates.size(), static_cast<size_t>(residual.size())));
    const size_t n = TallyAgainstWindow(residual, weight, leverage, link, scratch->candidates.data(), &window);
    *num_cells = static_cast<int>(n);
    if (*num_cells < kMinScaleCells) return kNaN;
    const double median = MedianInWindow(n, window, scratch->candidates.data());
    if (!std::isnan(median)) {
      scratch->median_guess = median;
      return kMadToSigma * median;  // positive: the window lies above 0
    }
  }
  // Every term of the cells kept, in order, by a branch-free compaction.
  std::vector<uint64_t>& standardised = scratch->terms;
  standardised.resize(residual.size());
  const size_t n = KeepTerms(residual, weight, leverage, link, standardised.data());
  standardised.resize(n);
  *num_cells = static_cast<int>(n);
  if (*num_cells < kMinScaleCells) return kNaN;
  const double median = MedianOfNonNegative(standardised, scratch);
  scratch->median_guess = median;
  const double scale = kMadToSigma * median;
  if (scale > 0.0) return scale;
  // More than half the cells fit exactly (identical prices, e.g. a national
  // tariff): the root mean square still measures the few that do not
  // (summed in cell order).
  double sum = 0.0;
  for (uint64_t bits : standardised) {
    const double v = std::bit_cast<double>(bits);
    sum += v * v;
  }
  return std::sqrt(sum / *num_cells);
}

namespace {

// One weighted solve of a heading's CPD normal equations X'WX [a; b] = X'Wy
// by block elimination: side A (the smaller of regions and items) stays
// dense, side B is eliminated, leaving the Schur complement
// S = D_A - C D_B^-1 C' (C the A x B weight sums, D the weight sums of each
// region and item). S 1 = 0, so S + 11'/m (m = |A|) is factorised instead:
// it is invertible on a linked design, and its inverse G equals S^+ on the
// vectors that sum to 0, which are all the solve and the leverage meet.
//   Fit: a = G (r_A - C D_B^-1 r_B), b = D_B^-1 (r_B - C' a), r = X'Wy; the
//   right-hand side sums to 0, so 1'a = 0 (any solution gives the same
//   fitted values a_r + b_i; the solve then shifts them so that the region
//   effects have mean 0).
//   Leverage: for cell (a, b) with u = e_a - c_b / d_b,
//   q = x'(X'WX)^+ x = 1 / d_b + u'G u
//     = 1 / d_b + G_aa - 2 (G C)_ab / d_b + (C'G C)_bb / d_b^2.
// One factorisation serves both, so each iteration of the robust fit forms
// one Schur complement and scatters the cells once.
struct BlockSolve {
  // Per compressed region and item, shifted so that the region effects
  // have mean 0 (as FitCpd reports them).
  Eigen::VectorXd region_effect;
  Eigen::VectorXd item_effect;
  Eigen::VectorXd residual;  // per cell: y - (a_r + b_i) (empty without y)
  Eigen::VectorXd leverage;  // per cell: q (NaN when S is singular)
};

// Adds the cells' weights into D and X'Wy (`fit`: with the ln prices) and,
// unless kSparse, into C (cleared by the caller); returns whether the cells
// proved distinct with positive weights (each entry of C found 0 before
// its addition). kSparse: C already holds zeros off the cells, no two cells
// sharing an entry; the caller writes the cells' entries (0 + w is w).
template <bool kSparse>
bool ScatterCells(std::span<const int> a_of, std::span<const int> b_of, std::span<const double> log_price,
                  const Eigen::VectorXd& weight, bool fit, FitWorkspace* ws) {
  const int64_t num_cells = static_cast<int64_t>(a_of.size());
  Eigen::MatrixXd& c = ws->c;
  bool distinct = true;
  // The sums of side A run in registers while its index stays the same (a
  // heading's cells come by item, and the items are side A when fewer than
  // the regions): the same additions in the same order as through memory,
  // without each waiting on the store of the one before.
  int run_a = num_cells > 0 ? a_of[0] : 0;
  double d_a = 0.0, r_a = 0.0;
  for (int64_t k = 0; k < num_cells; ++k) {
    const int a = a_of[k], b = b_of[k];
    if (a != run_a) {
      ws->d_a[run_a] = d_a;
      ws->r_a[run_a] = r_a;
      run_a = a;
      d_a = ws->d_a[a];
      r_a = ws->r_a[a];
    }
    const double w = weight[k];
    if constexpr (!kSparse) {
      distinct &= c(a, b) == 0.0 && w > 0.0;
      c(a, b) += w;
    }
    d_a += w;
    ws->d_b[b] += w;
    if (fit) {
      r_a += w * log_price[k];
      ws->r_b[b] += w * log_price[k];
    }
  }
  if (num_cells > 0) {
    ws->d_a[run_a] = d_a;
    ws->r_a[run_a] = r_a;
  }
  return distinct;
}

// Sets ws->scaled = C D_B^-1/2, entry by entry as the dense product c * diag
// forms it, and finishes C where ScatterCells<true> left it: off the cells
// both are 0 (when 1 / d_b is finite). The cells' entries are written column
// by column (a heading's cells come by item, a row of C when items are side
// A): stores to neighbouring addresses. `sparse` and `distinct` as in
// SolveBlocks.
void ScaleColumns(std::span<const int> a_of, std::span<const int> b_of, const Eigen::VectorXd& weight, int m,
                  int num_b, bool sparse, bool distinct, FitWorkspace* ws) {
  const int64_t num_cells = static_cast<int64_t>(a_of.size());
  Eigen::MatrixXd& c = ws->c;
  const Eigen::VectorXd& root_inverse_d_b = ws->root_inverse_d_b;
  if (distinct && root_inverse_d_b.allFinite()) {
    if (!sparse) {
      ws->scaled.setZero(m, num_b);
      const Groups by_b = GroupBy(b_of, num_b);
      ws->cell_by_entry = by_b.order;
      ws->column_start = by_b.start;
      ws->row.resize(num_cells);
      for (int64_t j = 0; j < num_cells; ++j) ws->row[j] = a_of[by_b.order[j]];
    }
    const int* cell = ws->cell_by_entry.data();
    const int* row = ws->row.data();
    for (int b = 0; b < num_b; ++b) {
      double* c_column = &c(0, b);
      double* scaled_column = &ws->scaled(0, b);
      const double root = root_inverse_d_b[b];
      for (int j = ws->column_start[b]; j < ws->column_start[b + 1]; ++j) {
        const double w = weight[cell[j]];
        c_column[row[j]] = w;
        scaled_column[row[j]] = w * root;
      }
    }
    ws->zeros_off_cells = true;
  } else {
    if (sparse) {  // a 1 / d_b not finite (all of b's weights 0): C still needs the cells' weights
      for (int64_t k = 0; k < num_cells; ++k) c(a_of[k], b_of[k]) = weight[k];
    }
    ws->scaled.noalias() = c * root_inverse_d_b.asDiagonal();
    ws->zeros_off_cells = false;
  }
}

// Returns false (leverage NaN) when S + 11'/m is not positive definite.
// `log_price` may be empty: then only the leverage is formed. Successive
// calls with one workspace and ws->zeros_off_cells set must pass the same
// cells (only the weights may change).
bool SolveBlocks(int num_regions, int num_items, std::span<const int> region, std::span<const int> item,
                 std::span<const double> log_price, const Eigen::VectorXd& weight, FitWorkspace* ws,
                 BlockSolve* out) {
  const bool regions_dense = num_regions <= num_items;
  const int m = regions_dense ? num_regions : num_items;
  const int num_b = regions_dense ? num_items : num_regions;
  const std::span<const int> a_of = regions_dense ? region : item;
  const std::span<const int> b_of = regions_dense ? item : region;
  const bool fit = !log_price.empty();
  const int64_t num_cells = static_cast<int64_t>(a_of.size());
  Eigen::MatrixXd& c = ws->c;
  const bool sparse = ws->zeros_off_cells && c.rows() == m && c.cols() == num_b;
  if (!sparse) c.setZero(m, num_b);
  ws->d_a.setZero(m);
  ws->d_b.setZero(num_b);
  ws->r_a.setZero(m);
  ws->r_b.setZero(num_b);
  const bool distinct = sparse ? ScatterCells<true>(a_of, b_of, log_price, weight, fit, ws)
                               : ScatterCells<false>(a_of, b_of, log_price, weight, fit, ws);
  const Eigen::VectorXd& inverse_d_b = ws->inverse_d_b = ws->d_b.cwiseInverse();
  ws->root_inverse_d_b = inverse_d_b.cwiseSqrt();
  ScaleColumns(a_of, b_of, weight, m, num_b, sparse, distinct, ws);
  // Lower triangle of S + 11'/m, as one symmetric rank update.
  ws->s.setConstant(m, m, 1.0 / m);
  SubtractGramLower(ws->scaled, &ws->s);
  ws->s.diagonal() += ws->d_a;
  const Eigen::LLT<Eigen::MatrixXd> llt(ws->s);
  if (llt.info() != Eigen::Success) {
    out->leverage.setConstant(num_cells, kNaN);
    return false;
  }
  out->leverage.resize(num_cells);  // every cell's set below
  if (fit) {
    const Eigen::VectorXd effect_a = llt.solve(ws->r_a - c * inverse_d_b.cwiseProduct(ws->r_b));
    Eigen::VectorXd effect_b = ws->r_b;
    effect_b.noalias() -= c.transpose() * effect_a;
    effect_b = effect_b.cwiseProduct(inverse_d_b);
    out->region_effect = regions_dense ? effect_a : effect_b;
    out->item_effect = regions_dense ? effect_b : effect_a;
    const double shift = out->region_effect.mean();
    out->region_effect.array() -= shift;
    out->item_effect.array() += shift;
  }
  ws->g.setIdentity(m, m);
  llt.solveInPlace(ws->g);
  SetProduct(ws->g, c, &ws->gc);
  ws->cgc = (c.array() * ws->gc.array()).colwise().sum().transpose();
  const Eigen::MatrixXd& g = ws->g;
  const Eigen::MatrixXd& gc = ws->gc;
  const Eigen::VectorXd& cgc = ws->cgc;
  auto leverage = [&](int a, int b) {
    return inverse_d_b[b] + g(a, a) - 2.0 * gc(a, b) * inverse_d_b[b] + cgc[b] * inverse_d_b[b] * inverse_d_b[b];
  };
  if (!fit) {
    for (int64_t k = 0; k < num_cells; ++k) out->leverage[k] = leverage(a_of[k], b_of[k]);
    return true;
  }
  // The residuals in the same pass (a_r + b_i in either order: the sum of
  // two numbers does not depend on their order).
  const Eigen::VectorXd& effect_a = regions_dense ? out->region_effect : out->item_effect;
  const Eigen::VectorXd& effect_b = regions_dense ? out->item_effect : out->region_effect;
  out->residual.resize(num_cells);
  for (int64_t k = 0; k < num_cells; ++k) {
    const int a = a_of[k], b = b_of[k];
    out->leverage[k] = leverage(a, b);
    out->residual[k] = log_price[k] - (effect_a[a] + effect_b[b]);
  }
  return true;
}

}  // namespace

Eigen::VectorXd LeverageFactors(int num_regions, int num_items, std::span<const int> region,
                                std::span<const int> item, const Eigen::VectorXd& weight) {
  BlockSolve solve;
  FitWorkspace workspace;
  SolveBlocks(num_regions, num_items, region, item, {}, weight, &workspace, &solve);
  return std::move(solve.leverage);
}

int FindCuttingCells(int num_regions, int num_items, std::span<const int> region,
                     std::span<const int> item, std::vector<CellLink>* link,
                     std::map<int, std::vector<int>>* region_side) {
  // Nodes: regions 0..R-1, then items R..R+I-1; each cell is an edge.
  const int num_nodes = num_regions + num_items;
  const int num_cells = static_cast<int>(region.size());
  std::vector<int> node_of_edge_end(2 * num_cells);
  for (int k = 0; k < num_cells; ++k) {
    node_of_edge_end[2 * k] = region[k];
    node_of_edge_end[2 * k + 1] = num_regions + item[k];
  }
  const Groups adjacency = GroupBy(node_of_edge_end, num_nodes);  // entries are edge ends 2k, 2k+1
  auto other = [&](int end) { return node_of_edge_end[end ^ 1]; };
  std::vector<int> tin(num_nodes, -1), low(num_nodes, 0), last(num_nodes, 0), parent_cell(num_nodes, -1);
  std::vector<int> next(num_nodes, 0), order, stack;
  int num_parts = 0;
  for (int root = 0; root < num_nodes; ++root) {
    if (tin[root] >= 0) continue;
    ++num_parts;
    tin[root] = low[root] = static_cast<int>(order.size());
    order.push_back(root);
    next[root] = adjacency.start[root];
    stack.push_back(root);
    while (!stack.empty()) {
      const int v = stack.back();
      if (next[v] < adjacency.start[v + 1]) {
        const int end = adjacency.order[next[v]++];
        if (end / 2 == parent_cell[v]) continue;
        const int u = other(end);
        if (tin[u] < 0) {
          parent_cell[u] = end / 2;
          tin[u] = low[u] = static_cast<int>(order.size());
          order.push_back(u);
          next[u] = adjacency.start[u];
          stack.push_back(u);
        } else {
          low[v] = std::min(low[v], tin[u]);
        }
        continue;
      }
      stack.pop_back();
      last[v] = static_cast<int>(order.size()) - 1;
      if (parent_cell[v] < 0) continue;
      const int cell = parent_cell[v];
      const int parent = v < num_regions ? num_regions + item[cell] : region[cell];
      low[parent] = std::min(low[parent], low[v]);
    }
  }
  // Regions among the first t nodes of the depth-first order: a subtree is a
  // contiguous range of it, so its regions are counted in O(1).
  std::vector<int> regions_before(num_nodes + 1, 0);
  for (int t = 0; t < num_nodes; ++t) regions_before[t + 1] = regions_before[t] + (order[t] < num_regions);
  std::vector<int> item_num_cells(num_items, 0);
  for (int k = 0; k < num_cells; ++k) ++item_num_cells[item[k]];
  link->assign(num_cells, CellLink::kNone);
  region_side->clear();
  for (int v = 0; v < num_nodes; ++v) {
    const int cell = parent_cell[v];
    if (cell < 0) continue;
    const int parent = v < num_regions ? num_regions + item[cell] : region[cell];
    if (low[v] <= tin[parent]) continue;  // another path links v's subtree
    if (item_num_cells[item[cell]] == 1) {
      (*link)[cell] = CellLink::kItemOnlyHere;
      continue;
    }
    (*link)[cell] = CellLink::kCutsHeading;
    // The subtree below the cut holds the region when v is the region,
    // otherwise the item's side.
    const bool below_is_region_side = v < num_regions;
    const int below = regions_before[last[v] + 1] - regions_before[tin[v]];
    const int side = below_is_region_side ? below : num_regions - below;
    if (side <= 1) continue;
    std::vector<int>& regions = (*region_side)[cell];
    for (int t = 0; t < num_nodes; ++t) {
      const bool in_subtree = t >= tin[v] && t <= last[v];
      if (order[t] < num_regions && in_subtree == below_is_region_side) regions.push_back(order[t]);
    }
    std::sort(regions.begin(), regions.end());
  }
  return num_parts;
}

ScreenFit FitScreen(const CpdData& data, const OutlierOptions& options, FitWorkspace* workspace) {
  ScreenFit fit;
  FitWorkspace local;
  FitWorkspace& ws = workspace != nullptr ? *workspace : local;
  ws.zeros_off_cells = false;  // a new design
  const int num_cells = static_cast<int>(data.region.size());
  const Compressed c = Compress(data);
  // The graph search that finds the cutting cells also counts the groups of
  // linked regions (a search of its own took 2.6 % of the screen's fits).
  if (num_cells == 0 ||
      FindCuttingCells(c.num_regions, c.num_items, c.region, c.item, &fit.link, &fit.region_side) != 1) {
    // No parities: FitCpd says why, in the words of the elementary stage.
    fit.link.clear();
    fit.region_side.clear();
    CpdOptions cpd;
    cpd.compute_standard_errors = false;
    fit.message = FitCpd(data, cpd).message;
    return fit;
  }
  for (auto& [cell, regions] : fit.region_side) {
    for (int& r : regions) r = c.region_of[r];
  }
  fit.item_num_cells.assign(data.num_items, 0);
  for (int k = 0; k < num_cells; ++k) ++fit.item_num_cells[data.item[k]];
  // The least-squares start, then the reweighted fits; `latest` holds the
  // effects of the last one (compressed numbering).
  BlockSolve latest, refit;
  ScaleScratch& scratch = ws.scale;
  scratch.median_guess = 0.0;  // a new heading's scale
  fit.weight = Eigen::VectorXd::Ones(num_cells);
  if (!SolveBlocks(c.num_regions, c.num_items, c.region, c.item, data.log_price, fit.weight, &ws, &latest)) {
    fit.message = "the CPD normal equations are numerically singular";
    return fit;
  }
  // Takes a solve's leverages, residuals and effects (swapped, so the
  // arrays are reused by the next solve).
  auto adopt = [&](BlockSolve* solve) {
    fit.leverage.swap(solve->leverage);
    fit.residual.swap(solve->residual);
    std::swap(latest, *solve);
  };
  refit = std::move(latest);
  adopt(&refit);
  fit.converged = options.fit == OutlierFit::kLeastSquares;
  // Whether fit.scale is that of the current residuals, weights and
  // leverages (the loop stops after forming it, unless out of iterations).
  bool scale_current = false;
  while (!fit.converged && fit.num_iterations < options.max_iterations) {
    // The scale is re-estimated from the current residuals at every step,
    // so it is not fixed by a least-squares fit that the errors dragged.
    const double scale = fit.scale =
        RobustScale(fit.residual, fit.weight, fit.leverage, fit.link, &scratch, &fit.num_scale_cells);
    scale_current = true;
    if (!(scale > 0.0)) break;  // too few cells, or an exact fit: least squares it is
    Eigen::VectorXd& next = ws.next_weight;
    const double change = HuberWeights(fit.residual, options.huber_constant * scale, fit.weight, &next);
    if (change <= options.weight_tolerance) {
      fit.converged = true;
      break;
    }
    if (!SolveBlocks(c.num_regions, c.num_items, c.region, c.item, data.log_price, next, &ws, &refit)) {
      break;  // cannot happen with positive weights; keep the last fit
    }
    fit.weight.swap(next);
    adopt(&refit);
    scale_current = false;
    ++fit.num_iterations;
  }
  if (!fit.converged && fit.num_iterations == 0) fit.converged = true;  // nothing to reweight
  fit.identified = true;
  fit.degrees_of_freedom = num_cells - c.num_regions - c.num_items + 1;
  fit.log_parity = Eigen::VectorXd::Constant(data.num_regions, kNaN);
  fit.item_effect = Eigen::VectorXd::Constant(data.num_items, kNaN);
  for (int r = 0; r < c.num_regions; ++r) fit.log_parity[c.region_of[r]] = latest.region_effect[r];
  for (int i = 0; i < c.num_items; ++i) fit.item_effect[c.item_of[i]] = latest.item_effect[i];
  if (!scale_current) {
    fit.scale = RobustScale(fit.residual, fit.weight, fit.leverage, fit.link, &scratch, &fit.num_scale_cells);
  }
  return fit;
}

}  // namespace paritas::internal
