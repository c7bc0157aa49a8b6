// GEKS: the transitive set of parities closest, in least squares of logs, to
// a set of bilateral indices (Gini 1931, Eltetö and Köves 1964, Szulc 1964;
// Diewert 1999 for the least-squares characterisation).
#ifndef PARITAS_GEKS_H_
#define PARITAS_GEKS_H_

#include <string>
#include <vector>

#include <Eigen/Core>

namespace paritas {

// Outcome of a GEKS fit.
struct GeksResult {
  // Log parity of every region, normalised so that the regions that take
  // part have mean 0; NaN for regions without any available pair.
  Eigen::VectorXd log_parity;
  // True when all regions that take part form one linked group.
  bool identified = false;
  // Linked groups of regions (indices), largest first, ties by smallest
  // index; one group when identified.
  std::vector<std::vector<int>> groups;
  // True when every pair of participating regions had a bilateral, so the
  // closed form ln P_b = mean_a ln B_ab was used.
  bool complete = false;
  // Root mean square of ln B_ab - (ln P_b - ln P_a) over available pairs:
  // how far the bilaterals are from transitive.
  double rms_log_residual = 0.0;
};

// Computes GEKS parities from a region x region matrix of log bilateral
// indices, entry (a, b) = ln(B_ab) comparing b with a, NaN where the pair has
// no bilateral. The matrix need not be antisymmetric: the pair (a, b) uses
// ½(ln B_ab - ln B_ba) when both are present. Minimises
// sum over available pairs of (ln P_b - ln P_a - ln B_ab)^2; with every pair
// present this is the classic GEKS formula. Regions in unlinked groups are
// reported in `groups`, and each group is normalised to mean 0 on its own.
GeksResult Geks(const Eigen::MatrixXd& log_bilateral);

}  // namespace paritas

#endif  // PARITAS_GEKS_H_
