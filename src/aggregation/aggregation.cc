// Aggregates are computed from the basic headings directly rather than from
// child aggregates, so every node's parities are results of their own and do
// not depend on how the tree is nested above the headings.
#include "paritas/aggregation/aggregation.h"

#include <cmath>

namespace paritas {

BilateralMatrices NodeBilaterals(const NodeArrays& arrays, const BilateralOptions& options) {
  return AllPairsWeighted(arrays.price, arrays.expenditure, options);
}

AggregateParities GeksOverIndex(const Eigen::MatrixXd& index) {
  AggregateParities out;
  const GeksResult geks = Geks(index.array().log().matrix());
  out.log_parity = geks.log_parity;
  out.identified = geks.identified;
  out.groups = geks.groups;
  out.complete = geks.complete;
  out.rms_log_residual = geks.rms_log_residual;
  return out;
}

AggregateParities AggregateFromBilaterals(const NodeArrays& arrays,
                                          const BilateralMatrices& bilaterals,
                                          const AggregationMethod& method) {
  AggregateParities out = method.Aggregate(arrays, bilaterals);
  const int num_regions = static_cast<int>(arrays.price.rows());
  out.num_headings = Eigen::VectorXi::Zero(num_regions);
  for (int r = 0; r < num_regions; ++r) {
    for (int h = 0; h < arrays.price.cols(); ++h) {
      const double p = arrays.price(r, h), e = arrays.expenditure(r, h);
      if (std::isfinite(p) && p > 0 && std::isfinite(e) && e > 0) ++out.num_headings(r);
    }
  }
  return out;
}

}  // namespace paritas
