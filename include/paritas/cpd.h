// Country-Product-Dummy regression for one basic heading (Summers 1973):
// ln p_ri = a_r + b_i + e_ri over the cells present, by (weighted) least
// squares. The normal equations have a diagonal region block and a diagonal
// item block; the larger is eliminated and the dense Schur complement of the
// smaller is solved by Cholesky, so the cost is about
// cells x min(R, I) + min(R, I)^3 rather than (R + I)^3.
#ifndef PARITAS_CPD_H_
#define PARITAS_CPD_H_

#include <span>
#include <string>
#include <vector>

#include <Eigen/Core>

namespace paritas {

// The observations of one heading: one entry per cell (region x item).
struct CpdData {
  int num_regions = 0;   // regions indexed 0..num_regions-1
  int num_items = 0;     // items indexed 0..num_items-1
  std::span<const int> region;        // region index of each cell
  std::span<const int> item;          // item index of each cell
  std::span<const double> log_price;  // ln(cell price)
  // Weight of each cell (> 0); empty means all 1.
  std::span<const double> weight;
};

enum class CpdLoss { kLeastSquares, kHuber, kCauchy };

struct CpdOptions {
  // Loss: least squares (default), or a robust loss solved with Ceres Solver.
  CpdLoss loss = CpdLoss::kLeastSquares;
  // Scale of the robust loss in log points; <= 0 means estimated robustly
  // (1.4826 x median absolute residual of a least-squares start). Huber's
  // 1.345 sigma gives 95 % efficiency under normal errors (Huber 1981).
  double robust_scale = 0.0;
  // Weights defining the reference: the log parities are normalised so that
  // sum_r w_r a_r = 0. Empty means the plain mean over regions present.
  // Entries for regions absent from the heading are ignored; the rest are
  // renormalised to sum to 1.
  std::vector<double> reference_weights;
  // Computes standard errors sigma^2 (X'WX)^-1 of each a_r - sum w a.
  bool compute_standard_errors = true;
  // Also computes the heteroskedasticity-robust (sandwich, HC0) errors.
  bool compute_robust_standard_errors = false;

  bool IsValid(std::string* error) const;
};

struct CpdResult {
  // Log parity a_r of each region (normalised as in CpdOptions); NaN for
  // regions without cells.
  Eigen::VectorXd log_parity;
  // Item effects b_i (log of the item's price level in the reference); NaN
  // for items without cells.
  Eigen::VectorXd item_effect;
  // Standard error of each log parity relative to the reference; NaN when not
  // computed or not estimable (no residual degrees of freedom).
  Eigen::VectorXd log_se;
  Eigen::VectorXd log_se_robust;
  // Fitted ln price and residual of each cell, in the order given.
  Eigen::VectorXd fitted;
  Eigen::VectorXd residual;
  // Residual variance sum w e^2 / (cells - regions - items + 1).
  double sigma2 = 0.0;
  int degrees_of_freedom = 0;
  // Robust loss scale used (log points); 0 for least squares.
  double robust_scale_used = 0.0;
  int num_cells = 0;
  int num_regions_present = 0;
  int num_items_present = 0;
  // False when the regions present are not all linked through shared items;
  // then `groups` lists the linked groups (region indices) and no parity is
  // returned.
  bool identified = false;
  std::vector<std::vector<int>> groups;
  std::string message;
};

// Fits the CPD model. Never aborts on data; returns identified = false with
// the groups when the regions are not linked.
CpdResult FitCpd(const CpdData& data, const CpdOptions& options);

// Finds the linked groups of regions in a heading: regions are linked when
// they price a common item, directly or through other regions. Groups are
// sorted largest first, ties by smallest region index; regions without cells
// are left out.
std::vector<std::vector<int>> LinkedRegionGroups(int num_regions, int num_items,
                                                 std::span<const int> region,
                                                 std::span<const int> item);

}  // namespace paritas

#endif  // PARITAS_CPD_H_
