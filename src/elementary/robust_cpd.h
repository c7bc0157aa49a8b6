// The pieces of the robust CPD fit that do not need the normal equations:
// the cells in compressed numbering, the loss functions' derivatives and the
// scale estimate. cpd.cc runs the reweighting loop with its own solver.
#ifndef PARITAS_INTERNAL_ELEMENTARY_ROBUST_CPD_H_
#define PARITAS_INTERNAL_ELEMENTARY_ROBUST_CPD_H_

#include <Eigen/Core>
#include <span>

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

// Tuning constants for 95 % asymptotic efficiency under normal errors:
// Huber 1.345 (Huber 1981), Cauchy 2.385 (Holland and Welsch 1977).
inline constexpr double kHuberTuning = 1.345;
inline constexpr double kCauchyTuning = 2.385;
// Returns the tuning constant of `loss` (1 for least squares).
double TuningConstant(CpdLoss loss);

// Returns the reweighting factor psi(r)/r of the loss with threshold
// `threshold` at the whitened residual r (1 for least squares). Huber:
// min(1, t/|r|); Cauchy: 1 / (1 + (r/t)^2).
double RobustWeightFactor(CpdLoss loss, double threshold, double residual);

// psi(z) and psi'(z) of the loss at a standardised residual z with tuning
// constant c. Huber: psi = max(-c, min(c, z)), psi' = 1 for |z| <= c else 0
// (statsmodels' HuberT). Cauchy (rho = c^2/2 ln(1 + (z/c)^2)):
// psi = z / (1 + (z/c)^2), psi' = (1 - (z/c)^2) / (1 + (z/c)^2)^2.
double Psi(CpdLoss loss, double c, double z);
double PsiDerivative(CpdLoss loss, double c, double z);

// Returns median(|values|) / Phi^-1(3/4): the MAD about 0 (statsmodels'
// scale.mad(resid, center=0), used by its RLM). The median of an even count
// is the mean of the two middle values, as numpy's.
double MadAboutZero(std::span<const double> values);

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_ELEMENTARY_ROBUST_CPD_H_
