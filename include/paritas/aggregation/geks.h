// GEKS: the transitive set of parities closest, in least squares of logs, to
// a set of bilateral indices (Gini 1931, Eltetö and Köves 1964, Szulc 1964;
// Diewert 1999 for the least-squares characterisation). A full matrix takes
// the closed form; a matrix with gaps is solved through the normal equations
// of the comparison graph, one linked group at a time.
#ifndef PARITAS_AGGREGATION_GEKS_H_
#define PARITAS_AGGREGATION_GEKS_H_

#include <Eigen/Core>
#include <string>
#include <vector>

namespace paritas {

// Outcome of a GEKS fit.
struct GeksResult {
  // Log parity of every region (natural log, relative to its group), each
  // linked group normalised to mean 0 on its own; NaN for regions that do not
  // take part (see Geks).
  Eigen::VectorXd log_parity;
  // True when the regions that take part form exactly one linked group (and
  // at least one region takes part), so every ratio of parities is defined.
  bool identified = false;
  // Linked groups of regions (indices, ascending within a group), largest
  // first, ties by smallest first index. A region that takes part only
  // through its diagonal entry is a group of one.
  std::vector<std::vector<int>> groups;
  // True when identified and every pair of participating regions had a
  // bilateral, so the closed form ln P_b = mean_a ln B_ab was used.
  bool complete = false;
  // Root mean square, over the available unordered pairs {a, b}, of
  // d_ab - (ln P_b - ln P_a), where d_ab is the pair's (antisymmetrised) log
  // bilateral: how far the bilaterals are from transitive, in log points.
  // 0 when no pair is available.
  double rms_log_residual = 0.0;
};

// Computes GEKS parities from a region x region matrix of log bilateral
// indices, entry (a, b) = ln(B_ab) comparing b with a, NaN (or any non-finite
// value) where the pair has no bilateral. The matrix need not be
// antisymmetric: the pair {a, b} uses d_ab = ½(ln B_ab - ln B_ba) when both
// are present, ln B_ab or -ln B_ba when only one is. Minimises
//   sum over available pairs {a, b} of (ln P_b - ln P_a - d_ab)^2,
// which with every pair present is the classic GEKS formula
// ln P_b = (1/n) sum_a d_ab. A region takes part when any entry of its row or
// column, its diagonal included, is finite; the diagonal carries no
// information beyond that. Regions in unlinked groups are reported in
// `groups`, and each group is normalised to mean 0 on its own.
// Cost: O(n^2) for a full matrix; O(n^2 + sum over groups of g^3) otherwise.
GeksResult Geks(const Eigen::MatrixXd& log_bilateral);

// How GeksByRowBlocks splits its work.
struct GeksBlockOptions {
  // Regions per row block, a positive multiple of 4 (as for SpreadOptions;
  // every sum is the same chain as in the full matrices); memory is
  // about 4 x block x regions doubles per thread. The result does not depend
  // on it. Default 128.
  int block_rows = 128;
  // Threads over the blocks, >= 0; 0 = OpenMP's default. Inside a parallel
  // region the blocks run on the calling thread. Default 0.
  int num_threads = 0;
  // Returns false (and says why in `error`) when a field is out of range.
  bool IsValid(std::string* error) const;
};

// The bilateral index GeksByRowBlocks runs on (a method's choice, not an
// option of its own).
enum class GeksIndex { kFisher, kTornqvist };

// Computes Geks(ln B) for B = AllPairsWeighted(price, expenditure).fisher
// (kFisher) or .tornqvist (kTornqvist) without forming B or any other
// region x region matrix, when the closed form applies: at least two
// regions take part and every pair of them has an index. Then ln P_b =
// (1/n) sum_a d_ab needs only the column sums of d, reduced from the
// sums behind the index (as AllPairsSpreads forms them) a block of rows
// at a time; only d_bc for b < c is kept (packed, n (n - 1) / 2 doubles)
// for the column sums and the residual. Every entry and every sum is formed
// in the same order as Geks over the full matrix, so the result is bit for
// bit the same (tested: GeksByRowBlocks.EqualsGeksOverTheIndexMatrixBitForBit),
// for any block size and thread count. Returns false and leaves `result`
// untouched when the closed form does not apply (a pair without an index:
// the caller solves the comparison graph over the full matrix).
bool GeksByRowBlocks(GeksIndex index, const Eigen::MatrixXd& price,
                     const Eigen::MatrixXd& expenditure, const GeksBlockOptions& options,
                     GeksResult* result);

}  // namespace paritas

#endif  // PARITAS_AGGREGATION_GEKS_H_
