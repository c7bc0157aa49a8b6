// Aggregate parities: for an inner node of the classification, the method
// the run names (aggregation_method.h lists them) applied to the node's basic
// headings directly, with heading parities as prices and expenditure /
// parity as quantities.
#ifndef PARITAS_AGGREGATION_AGGREGATION_H_
#define PARITAS_AGGREGATION_AGGREGATION_H_

#include <string_view>
#include <vector>

#include <Eigen/Core>

#include "paritas/aggregation/aggregation_method.h"
#include "paritas/aggregation/bilateral_matrix.h"
#include "paritas/aggregation/geks.h"

namespace paritas {

// Computes the bilateral matrices of a node: all of them by default, or
// those `options` asks for.
BilateralMatrices NodeBilaterals(const NodeArrays& arrays,
                                 const BilateralOptions& options = BilateralOptions());

// Computes a node's parities with `method` from bilateral matrices that hold
// at least method.BilateralsNeeded(), and counts the headings each region
// has (parity and positive expenditure).
AggregateParities AggregateFromBilaterals(const NodeArrays& arrays,
                                          const BilateralMatrices& bilaterals,
                                          const AggregationMethod& method);

// GEKS over one all-pairs bilateral index matrix (ratio scale): the shared
// core of the geks-* methods.
AggregateParities GeksOverIndex(const Eigen::MatrixXd& index);

}  // namespace paritas

#endif  // PARITAS_AGGREGATION_AGGREGATION_H_
