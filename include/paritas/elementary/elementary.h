// Elementary parities: the price level of every region within one basic
// heading, from the heading's cell prices (CPD, robust CPD, or GEKS over
// bilateral Jevons indices).
#ifndef PARITAS_ELEMENTARY_ELEMENTARY_H_
#define PARITAS_ELEMENTARY_ELEMENTARY_H_

#include <string>
#include <vector>

#include <Eigen/Core>

#include "paritas/survey/config.h"
#include "paritas/elementary/cpd.h"
#include "paritas/survey/survey.h"

namespace paritas {

struct ElementaryOptions {
  ElementaryMethod method = ElementaryMethod::kCpd;
  // CPD weight of a representative cell (others weigh 1); 1 = unweighted.
  double representative_weight = 1.0;
  // Loss of robust-cpd (Huber by default) and its scale in log points
  // (<= 0: estimated robustly).
  CpdLoss robust_loss = CpdLoss::kHuber;
  double robust_scale = 0.0;
  // Standard errors of CPD parities (classic, and HC0 sandwich).
  bool compute_standard_errors = true;
  bool compute_robust_standard_errors = false;

  bool IsValid(std::string* error) const;
};

// Parities of one basic heading, for every region of the survey.
struct HeadingParities {
  int heading = -1;
  // ln parity of each region, normalised by the reference weights given
  // (sum w ln P = 0); NaN where the region priced nothing in the heading.
  Eigen::VectorXd log_parity;
  // Standard errors of ln parity relative to the reference (CPD methods);
  // NaN where not computed.
  Eigen::VectorXd log_se;
  Eigen::VectorXd log_se_robust;
  // Per region: items priced and quotes behind them.
  Eigen::VectorXi num_items;
  Eigen::VectorXi num_quotes;
  int num_regions_priced = 0;
  int num_items_priced = 0;
  int64_t num_cells = 0;
  // False when the regions that priced the heading fall into unlinked groups.
  bool identified = true;
  std::vector<std::vector<int>> groups;
  // CPD: fitted ln price and residual of every cell of the heading, in the
  // survey's cell order; residual variance. Empty for jevons-geks.
  Eigen::VectorXd cell_fitted;
  Eigen::VectorXd cell_residual;
  double sigma2 = 0.0;
  int degrees_of_freedom = 0;
  double robust_scale_used = 0.0;
  std::string message;
};

// Computes the elementary parities of `heading`. `reference_weights` (one per
// survey region, or empty for the plain mean) fix the normalisation.
HeadingParities ComputeHeadingParities(const Survey& survey, int heading,
                                       const ElementaryOptions& options,
                                       const std::vector<double>& reference_weights);

// The heading's cells as dense regions x items arrays: ln price (0 where
// absent) and presence (1 where priced). For the all-pairs Jevons matrix.
void HeadingPriceArrays(const Survey& survey, int heading, Eigen::MatrixXd* log_price,
                        Eigen::MatrixXd* present);

}  // namespace paritas

#endif  // PARITAS_ELEMENTARY_ELEMENTARY_H_
