// Country-Product-Dummy regression for one basic heading (Summers 1973):
// ln p_ri = a_r + b_i + e_ri over the cells present, by (weighted) least
// squares. The normal equations have a diagonal region block and a diagonal
// item block; the larger is eliminated and the dense Schur complement of the
// smaller is solved by Cholesky, so the cost is about
// cells x min(R, I) + min(R, I)^3 rather than (R + I)^3.
#ifndef PARITAS_ELEMENTARY_CPD_H_
#define PARITAS_ELEMENTARY_CPD_H_

#include <Eigen/Core>
#include <span>
#include <string>
#include <vector>

namespace paritas {

// The observations of one heading: one entry per cell (region x item). The
// spans are not owned and must outlive the FitCpd call. A (region, item)
// pair may appear more than once; each entry is one observation.
struct CpdData {
  int num_regions = 0;                // regions indexed 0..num_regions-1
  int num_items = 0;                  // items indexed 0..num_items-1
  std::span<const int> region;        // region index of each cell
  std::span<const int> item;          // item index of each cell
  std::span<const double> log_price;  // ln(cell price), finite
  // Weight of each cell (finite, > 0); empty means all 1.
  std::span<const double> weight;
};

enum class CpdLoss {
  kLeastSquares,  // plain (weighted) least squares (default)
  kHuber,         // Huber loss: quadratic within the scale, linear beyond
  kCauchy,        // Cauchy loss: log(1 + (e/scale)^2), redescending
};

// "least-squares", "huber", "cauchy".
std::string ToString(CpdLoss loss);
// Case-insensitive; returns false for unknown names.
bool FromString(const std::string& text, CpdLoss* loss);

struct CpdOptions {
  // Loss: least squares (default), or a robust loss solved with Ceres Solver
  // from the least-squares start.
  CpdLoss loss = CpdLoss::kLeastSquares;
  // Scale of the robust loss in log points (applied to sqrt(w) x residual);
  // 0 (default) means estimated: c x 1.4826 x MAD of the least-squares
  // residuals, with c = 1.345 for Huber and 2.385 for Cauchy, the tuning
  // constants giving 95 % efficiency under normal errors (Huber 1981;
  // Holland and Welsch 1977; common practice). Must be >= 0 and finite.
  // Ignored for least squares.
  double robust_scale = 0.0;
  // Weights defining the reference: the log parities are normalised so that
  // sum_r w_r a_r = 0. Empty (default) means the plain mean over regions
  // present. Otherwise one entry per region, finite, >= 0, not all 0.
  // Entries for regions absent from the heading are ignored and the rest are
  // renormalised to sum to 1; when they are all 0 the plain mean is used and
  // the result's message says so.
  std::vector<double> reference_weights;
  // Computes the classic standard errors sqrt(sigma^2 c'(X'WX)^- c) of each
  // a_r - sum w a (default true).
  bool compute_standard_errors = true;
  // Also computes the heteroskedasticity-robust (sandwich, HC0) errors
  // (default false).
  bool compute_robust_standard_errors = false;

  // Returns false and sets `error` when a field is out of range, e.g.
  // "robust_scale is -1; it must be 0 (estimate it) or a positive number of
  // log points".
  bool IsValid(std::string* error) const;
};

struct CpdResult {
  // Log parity a_r of each region (normalised as in CpdOptions); NaN for
  // regions without cells, and for all regions when not identified.
  Eigen::VectorXd log_parity;
  // Item effects b_i (log of the item's price level in the reference); NaN
  // for items without cells.
  Eigen::VectorXd item_effect;
  // Standard error of each log parity relative to the reference, in log
  // points; NaN when not computed or not estimable (no residual degrees of
  // freedom for log_se). For a robust loss both are those of the weighted
  // least-squares fit with the final iteratively reweighted weights
  // w x rho'(w e^2) (common practice).
  Eigen::VectorXd log_se;
  Eigen::VectorXd log_se_robust;
  // Fitted ln price and residual (ln p - fitted) of each cell, in the order
  // given; NaN when not identified.
  Eigen::VectorXd fitted;
  Eigen::VectorXd residual;
  // Residual variance sum w e^2 / (cells - regions - items + 1), with the
  // effective weights for a robust loss; NaN when degrees_of_freedom <= 0.
  double sigma2 = 0.0;
  int degrees_of_freedom = 0;
  // Robust loss scale used (log points); 0 for least squares.
  double robust_scale_used = 0.0;
  int num_cells = 0;
  int num_regions_present = 0;
  int num_items_present = 0;
  // False when the regions present are not all linked through shared items;
  // then `groups` lists the linked groups (region indices) and no parity is
  // returned. Also false, with `groups` empty, when the data or options are
  // invalid or the heading has no cells; `message` says why.
  bool identified = false;
  std::vector<std::vector<int>> groups;
  // Empty on a clean fit; otherwise what went wrong, or a note (e.g. the
  // reference fell back to the plain mean).
  std::string message;
};

// Fits the CPD model. Never aborts on data; returns identified = false with
// the groups when the regions are not linked, and with a message when the
// data or options are invalid.
CpdResult FitCpd(const CpdData& data, const CpdOptions& options);

// Finds the linked groups of regions in a heading: regions are linked when
// they price a common item, directly or through other regions. Groups are
// sorted largest first, ties by smallest region index, members ascending;
// regions without cells are left out, and so are entries whose region or
// item index is out of range.
std::vector<std::vector<int>> LinkedRegionGroups(int num_regions, int num_items,
                                                 std::span<const int> region,
                                                 std::span<const int> item);

}  // namespace paritas

#endif  // PARITAS_ELEMENTARY_CPD_H_
