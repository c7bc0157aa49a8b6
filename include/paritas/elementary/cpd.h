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

// Heteroskedasticity-consistent (sandwich) standard errors of CPD parities
// (MacKinnon and White 1985, "Some heteroskedasticity-consistent covariance
// matrix estimators with improved finite sample properties", Journal of
// Econometrics 29, 305-325). With A = X'WX, cell k's regressor x_k (its
// region and item indicators), weight w_k, residual e_k and hat value
// h_k = w_k x_k'A^- x_k, the variance of a contrast l'theta is
// l'A^- [sum_k w_k^2 u_k x_k x_k'] A^- l with
//   HC0: u_k = e_k^2 (White 1980)
//   HC1: u_k = e_k^2 n / (n - p), n cells, p = regions + items - 1
//   HC3: u_k = e_k^2 / (1 - h_k)^2
// A cell with h_k = 1 (to 1e-9: it alone fixes an item or a region, so its
// residual is 0 whatever its price) adds nothing under HC3, where the
// formula would be 0 / 0.
enum class RobustErrors {
  kOff,  // not computed (default of CpdOptions)
  kHc0,
  kHc1,
  kHc3,
};

// "off", "hc0", "hc1", "hc3".
std::string ToString(RobustErrors kind);
// Case-insensitive; returns false for unknown names.
bool FromString(const std::string& text, RobustErrors* kind);

struct CpdOptions {
  // Loss: least squares (default), or a robust loss fitted by iteratively
  // reweighted least squares from the least-squares start.
  CpdLoss loss = CpdLoss::kLeastSquares;
  // Threshold of the robust loss in log points (applied to sqrt(w) x
  // residual), held fixed through the fit; 0 (default) means c x s with s
  // re-estimated at every iteration as the median of |sqrt(w) e| over
  // Phi^-1(3/4) = 0.6745 (the MAD about 0 of the current residuals), and
  // c = 1.345 for Huber, 2.385 for Cauchy, the tuning constants giving 95 %
  // efficiency under normal errors (Huber 1981; Holland and Welsch 1977).
  // For Huber this is the fixed point statsmodels' RLM(HuberT()).fit()
  // reaches with its defaults (scale_est 'mad', update_scale). Must be >= 0
  // and finite. Ignored for least squares.
  double robust_scale = 0.0;
  // Weights defining the reference: the log parities are normalised so that
  // sum_r w_r a_r = 0. Empty (default) means the plain mean over regions
  // present. Otherwise one entry per region, finite, >= 0, not all 0.
  // Entries for regions absent from the heading are ignored and the rest are
  // renormalised to sum to 1; when they are all 0 the plain mean is used and
  // the result's message says so.
  std::vector<double> reference_weights;
  // Computes the standard errors of each a_r - sum w a (default true):
  // least squares: classic sqrt(sigma^2 l'(X'WX)^- l); robust loss: Huber's
  // sandwich (see CpdResult::log_se).
  bool compute_standard_errors = true;
  // Also computes sandwich errors of this kind (default off).
  RobustErrors robust_errors = RobustErrors::kOff;

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
  // freedom).
  // Least squares: classic, sqrt(sigma2 l'(X'WX)^- l).
  // Robust loss: Huber's sandwich (Huber 1973, "Robust regression",
  // Annals of Statistics 1, 799-821; Huber 1981, Robust Statistics, ch. 7:
  // the first of his three estimates, statsmodels' RLM cov='H1'): with
  // z_k = sqrt(w_k) e_k / s, psi the loss's derivative, n cells and
  // p = regions + items - 1,
  //   var = K^2 [sum psi(z)^2 / (n - p)] s^2 / [mean psi'(z)]^2 l'(X'WX)^- l,
  //   K = 1 + (p / n) var(psi'(z)) / mean(psi'(z))^2,
  // X'WX with the cell weights (not the reweighted ones); NaN when
  // mean psi'(z) = 0.
  Eigen::VectorXd log_se;
  // Sandwich errors of CpdOptions::robust_errors; for a robust loss those of
  // the weighted least-squares fit with the final reweighted weights
  // w x psi(z)/z (common practice).
  Eigen::VectorXd log_se_robust;
  // Fitted ln price and residual (ln p - fitted) of each cell, in the order
  // given; NaN when not identified.
  Eigen::VectorXd fitted;
  Eigen::VectorXd residual;
  // Residual variance sum w e^2 / (cells - regions - items + 1), with the
  // effective weights for a robust loss; NaN when degrees_of_freedom <= 0.
  double sigma2 = 0.0;
  int degrees_of_freedom = 0;
  // Robust loss threshold c x s at the end of the fit (log points); 0 for
  // least squares.
  double robust_scale_used = 0.0;
  // Reweighted fits after the least-squares start (robust loss only).
  int num_robust_iterations = 0;
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
