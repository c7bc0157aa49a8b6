// The robust CPD fit, kept apart so that Ceres Solver stays behind this
// header: cpd.cc hands over compressed cells and a least-squares start.
#ifndef PARITAS_INTERNAL_ELEMENTARY_ROBUST_CPD_H_
#define PARITAS_INTERNAL_ELEMENTARY_ROBUST_CPD_H_

#include <Eigen/Core>
#include <span>
#include <string>

#include "paritas/elementary/cpd.h"

namespace paritas::internal {

// Cells of one heading with regions and items renumbered to those present
// (0..num_regions-1, 0..num_items-1), all regions linked.
struct CompressedCells {
  int num_regions = 0;
  int num_items = 0;
  std::span<const int> region;
  std::span<const int> item;
  std::span<const double> log_price;
  std::span<const double> weight;  // one per cell, > 0
};

// Minimises sum_k rho(w_k (y_k - a_r - b_i)^2) with the Huber or Cauchy loss
// of the given scale (log points) by Ceres Solver, starting from
// (*region_effect, *item_effect) and holding one effect of the smaller block
// at its start value to fix the level. Single-threaded with fixed options,
// so the result is deterministic. Returns false and sets `message` when
// Ceres gives no usable solution.
bool SolveRobustCpd(const CompressedCells& cells, CpdLoss loss, double scale,
                    Eigen::VectorXd* region_effect, Eigen::VectorXd* item_effect,
                    std::string* message);

// Returns rho'(s) of the loss at s = w e^2, the factor by which iteratively
// reweighted least squares scales the cell's weight at convergence
// (1 for least squares).
double RobustWeightFactor(CpdLoss loss, double scale, double squared_residual);

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_ELEMENTARY_ROBUST_CPD_H_
