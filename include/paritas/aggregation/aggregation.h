// Aggregate parities: for an inner node of the classification, GEKS over
// bilateral Fisher or Törnqvist indices computed directly from the node's
// basic headings, with heading parities as prices and expenditure / parity
// as quantities.
#ifndef PARITAS_AGGREGATION_AGGREGATION_H_
#define PARITAS_AGGREGATION_AGGREGATION_H_

#include <vector>

#include <Eigen/Core>

#include "paritas/aggregation/bilateral_matrix.h"
#include "paritas/survey/config.h"
#include "paritas/aggregation/geks.h"

namespace paritas {

// The node's inputs, regions x the node's headings: heading parities (ratio
// scale, NaN where missing) and nominal expenditure (NaN where missing).
struct NodeArrays {
  Eigen::MatrixXd price;
  Eigen::MatrixXd expenditure;
};

struct AggregateParities {
  // ln parity of every region, mean 0 over the regions present; NaN where a
  // region has no heading with a parity and positive expenditure.
  Eigen::VectorXd log_parity;
  // Headings used per region (parity and positive expenditure).
  Eigen::VectorXi num_headings;
  bool identified = true;
  std::vector<std::vector<int>> groups;
  bool complete = false;
  // RMS of the log distance between the bilaterals and the GEKS result.
  double rms_log_residual = 0.0;
};

// Computes the bilateral matrices of a node: all of them by default, or
// those `options` asks for (AggregateFromBilaterals needs only the one of
// ChosenIndexOnly).
BilateralMatrices NodeBilaterals(const NodeArrays& arrays,
                                 const BilateralOptions& options = BilateralOptions());

// Returns the options that fill only the matrix `method` runs GEKS on
// (fisher for kGeksFisher, tornqvist for kGeksTornqvist).
BilateralOptions ChosenIndexOnly(AggregationMethod method);

// Computes GEKS parities of a node from its bilateral matrices; only the
// matrix of `method` is read, so it alone need be filled.
AggregateParities AggregateFromBilaterals(const NodeArrays& arrays,
                                          const BilateralMatrices& bilaterals,
                                          AggregationMethod method);

}  // namespace paritas

#endif  // PARITAS_AGGREGATION_AGGREGATION_H_
