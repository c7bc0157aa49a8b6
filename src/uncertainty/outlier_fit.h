// The fit the outlier screen measures one heading's cells against: CPD by
// iteratively reweighted least squares with Huber weights (each weighted
// solve is FitCpd's), the hat value of every cell, and the cells whose hat
// value is exactly 1, found on the region-item graph rather than by
// comparing a computed hat value with 1, so no tolerance decides it.
#ifndef PARITAS_UNCERTAINTY_OUTLIER_FIT_H_
#define PARITAS_UNCERTAINTY_OUTLIER_FIT_H_

#include <cstdint>
#include <limits>
#include <map>
#include <span>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "paritas/elementary/cpd.h"
#include "paritas/uncertainty/outliers.h"

namespace paritas::internal {

// What a cell's own residual can say.
enum class CellLink : uint8_t {
  // The heading's other cells also fix the cell's region and item levels
  // (hat value below 1): its residual carries information.
  kNone,
  // The cell is its item's only one: the item's level is the cell's price
  // (hat value 1); nothing else in the survey prices the item.
  kItemOnlyHere,
  // The cell alone links its region (and possibly a few more regions and
  // items) to the rest of the heading: removing it cuts the region-item
  // graph in two, so the residual is 0 whatever the price (hat value 1).
  kCutsHeading,
};

struct ScreenFit {
  bool identified = false;  // false: regions not linked or no cells
  std::string message;      // why not identified
  // Per region of the CpdData (NaN where absent): ln parity, mean 0 over
  // the regions present. Per item: item effect (NaN where absent).
  Eigen::VectorXd log_parity;
  Eigen::VectorXd item_effect;
  // Per cell, in the order given: residual ln p - a_r - b_i of the final
  // fit; Huber weight w (1 for least squares); q = x'(X'WX)^+ x with the
  // final weights (the hat value is w q).
  Eigen::VectorXd residual;
  Eigen::VectorXd weight;
  Eigen::VectorXd leverage;
  std::vector<CellLink> link;
  // Number of cells of each item (index of the CpdData).
  std::vector<int> item_num_cells;
  // For kCutsHeading cells: the regions (CpdData indices) on the cell's
  // region side once it is removed, listed only when there are several
  // (otherwise the side is the cell's own region).
  std::map<int, std::vector<int>> region_side;
  // Robust scale of the final residuals (RobustScale); NaN when fewer than
  // kMinScaleCells cells carry residual information.
  double scale = 0.0;
  int num_scale_cells = 0;
  // Residual degrees of freedom of the CPD: cells - regions - items + 1.
  int degrees_of_freedom = 0;
  int num_iterations = 0;  // reweighted fits after the least-squares start
  bool converged = false;
  // Set by the outlier screen's first pass (outliers.cc) when it has found
  // the heading's surely quiet cells: the per-cell entries above (residual,
  // weight, leverage, link) are then kept only for the other cells, listed
  // in `open` (cell indices, ascending; entry j is cell open[j]'s), and the
  // quiet ones are counted by how they were screened.
  bool prescreened = false;
  std::vector<int> open;
  int64_t num_quiet_by_fit = 0;
  int64_t num_quiet_leave_one_out = 0;
  // The typical scatter of one quote around its cell's mean (outliers.cc,
  // WithinCellSd), set by the screen's first pass for both of its passes;
  // NaN until then.
  double within_sd = std::numeric_limits<double>::quiet_NaN();
};

// Cells needed to estimate a heading's scale; below it the caller pools.
inline constexpr int kMinScaleCells = 3;

// Workspace of RobustScale, reused between calls, contents overwritten.
struct ScaleScratch {
  std::vector<uint64_t> terms;       // bit patterns of the terms kept
  std::vector<uint64_t> candidates;  // of the median's selection
  std::vector<uint32_t> tallies;     // the selection's digit counts
  // The last median found (0: none), where the next call looks first; it
  // decides only how fast the median is found, never its value.
  double median_guess = 0.0;
};

// Arrays of the block solve (see outlier_fit.cc) kept between the
// iterations of a fit and between the headings one thread fits, so that the
// large ones are allocated, and their pages first touched, once per thread.
// Contents are overwritten; FitScreen resets `zeros_off_cells` per heading.
struct FitWorkspace {
  // C (A x B weight sums), C with column b scaled by 1 / sqrt(d_b), the
  // Schur complement S + 11'/m, G = its inverse, and G C.
  Eigen::MatrixXd c, scaled, s, g, gc;
  Eigen::VectorXd d_a, d_b, r_a, r_b, inverse_d_b, root_inverse_d_b, cgc;
  // True once a solve of the current design has left c and scaled zero off
  // its cells, no two cells sharing an entry: later solves of the same
  // design (same cells, new weights) then write only the cells' entries.
  bool zeros_off_cells = false;
  // The cells by column b of C (cell_by_entry[column_start[b] ..
  // column_start[b + 1])) and the row a of each in that order; set with
  // zeros_off_cells.
  std::vector<int> cell_by_entry, column_start, row;
  Eigen::VectorXd next_weight;  // FitScreen's Huber weights being formed
  ScaleScratch scale;
};

// Fits the heading's cells (data.weight must be empty: the screen weighs
// every cell 1 before the Huber weights) with the fit `options` asks for.
// `workspace` may be null (a local one is used) or one the caller reuses
// across headings on the same thread; the result does not depend on it.
ScreenFit FitScreen(const CpdData& data, const OutlierOptions& options, FitWorkspace* workspace = nullptr);

// Returns 1.4826 x median over the cells with link kNone and hat value
// h = w q < 1 of |e| / sqrt(1 - h) (for a cell of weight 1 the term has
// variance close to sigma^2 under the model, the usual standardised
// residual); the root mean square of those terms when the median is 0; NaN
// with fewer than kMinScaleCells such cells. Sets `num_cells` to their
// number.
// The hat value of cell k is weight[k] x leverage[k].
double RobustScale(const Eigen::VectorXd& residual, const Eigen::VectorXd& weight,
                   const Eigen::VectorXd& leverage, const std::vector<CellLink>& link,
                   ScaleScratch* scratch, int* num_cells);

// Returns the median of the non-negative finite numbers whose bit patterns
// are `bits` (non-empty; `scratch` is workspace): the middle value, or the
// mean of the two middle values for an even count, exactly as sorting
// gives it (the middle value first in the sum).
double MedianOfNonNegative(const std::vector<uint64_t>& bits, ScaleScratch* scratch);

// Returns q_k = x_k' (X'WX)^+ x_k for every cell of a linked CPD design
// (regions 0..num_regions-1 and items 0..num_items-1 all present), with
// x_k the indicator of the cell's region and item. Forms the Schur
// complement of the smaller side by dense products, as FitCpd does: cost
// about min(R, I)^2 x max(R, I) + min(R, I)^3. NaN for every cell when the
// complement is not positive definite.
Eigen::VectorXd LeverageFactors(int num_regions, int num_items, std::span<const int> region,
                                std::span<const int> item, const Eigen::VectorXd& weight);

// Classifies the cells of a design (indices as LeverageFactors; every
// region and item with a cell) by bridges of the bipartite region-item
// graph (Tarjan 1974, iterative), and lists the regions on the region side
// of each bridge with several there. Returns the number of the graph's
// connected parts, each a group of linked regions: the design is linked
// when it is 1 (the classification is meant for that case).
int FindCuttingCells(int num_regions, int num_items, std::span<const int> region,
                      std::span<const int> item, std::vector<CellLink>* link,
                      std::map<int, std::vector<int>>* region_side);

// Whether the screen's per-cell passes that run on vectors of 8 cells
// where the dense products run on AVX-512 (ActiveDenseKernels() is
// kAvx512) do so: the Huber weights of each reweighting, and RobustScale's
// terms when it forms them all and its tally of them against its window
// (default true). No result may depend on it; tests turn it off to check
// that none does.
void EnableVectorCellPasses(bool enabled);

// Whether the screen lets a cell that surely passes (its residual and
// extreme quotes well inside the threshold, tested in squares with a margin)
// skip the full prediction (default true). The screen's rows must not depend
// on it; tests turn it off to check that they do not.
void EnableQuietPretest(bool enabled);
bool QuietPretestEnabled();

}  // namespace paritas::internal

#endif  // PARITAS_UNCERTAINTY_OUTLIER_FIT_H_
