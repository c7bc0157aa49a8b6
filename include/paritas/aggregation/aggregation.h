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

// Returns real expenditure by heading, regions x the node's headings, for an
// additive `method` given the node's normalised ln parities (ln(parity/100)):
// pi_h * q_rh with q_rh = e_rh / p_rh at the method's international prices
// where the region has a heading parity and positive expenditure, and
// e_rh / PPP_r (the node's parity) where it spends on a heading without a
// parity, so each row sums to the node's real expenditure E_r / PPP_r
// (Geary 1958; Khamis 1972: real expenditures at international prices add
// up over headings). NaN where the region has no parity or no expenditure
// on the heading. Empty (0 x 0) when the method is not additive.
Eigen::MatrixXd RealByHeading(const NodeArrays& arrays, const Eigen::VectorXd& log_parity,
                              const AggregationMethod& method);

}  // namespace paritas

#endif  // PARITAS_AGGREGATION_AGGREGATION_H_
