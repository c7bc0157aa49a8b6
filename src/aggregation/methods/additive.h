// The shared core of the additive methods (geary-khamis, ikle-dikhanov-balk).
// Both solve the parity equation
//   PPP_r = sum_h e_rh / sum_h pi_h q_rh,  q_rh = e_rh / p_rh
// (Geary 1958, JRSS A 121(1); Khamis 1972, JRSS A 135(1)) together with an
// equation for the international prices pi_h, which is all that differs
// between them. Sums run over the cells used: heading parity and expenditure
// both finite and positive.
#ifndef PARITAS_INTERNAL_AGGREGATION_METHODS_ADDITIVE_H_
#define PARITAS_INTERNAL_AGGREGATION_METHODS_ADDITIVE_H_

#include <Eigen/Core>
#include <string>
#include <string_view>

#include "paritas/aggregation/aggregation_method.h"

namespace paritas::internal {

// The cells an additive method reads, regions x headings, 0 where a cell is
// not used, so sums over the matrices run over the cells used.
struct AdditiveCells {
  Eigen::MatrixXd expenditure;    // e_rh
  Eigen::MatrixXd inverse_price;  // 1 / p_rh
  Eigen::MatrixXd quantity;       // q_rh = e_rh / p_rh
  Eigen::MatrixXd share;          // s_rh = e_rh / E_r
  Eigen::VectorXd total;          // E_r = sum_h e_rh (0: the region takes no part)
};

// Returns the cells of `arrays` an additive method uses.
AdditiveCells UsedCells(const NodeArrays& arrays);

// A method's international prices pi_h given the parities `ppp` (ratio
// scale, 0 for regions that take no part); NaN for headings no region uses.
using PriceEquation = Eigen::VectorXd (*)(const AdditiveCells& cells, const Eigen::VectorXd& ppp);

struct AdditiveMethod {
  std::string_view name;
  PriceEquation prices;
  // Sets the starting international prices of the fixed-point loop (the
  // method's own solution); returns false with `failure` set when it finds
  // none.
  bool (*start)(const AdditiveCells& cells, Eigen::VectorXd* pi, std::string* failure);
};

// The fixed-point iteration stops when the step max_r |ln PPP_r(k+1) -
// ln PPP_r(k)| is below kAdditiveTolerance and so is the distance to the
// fixed point it implies at the observed rate of contraction (or the step is
// at rounding level), and fails the node after kAdditiveMaxIterations.
inline constexpr double kAdditiveTolerance = 1e-12;
inline constexpr double kAdditiveRoundingLevel = 1e-15;
inline constexpr int kAdditiveMaxIterations = 20000;

// Solves the parity and price equations of `method` in each group of
// regions linked through shared headings; ln parities have mean 0 over each
// group. Sets `failure` (and leaves log_parity NaN) when the iteration does
// not converge.
AggregateParities SolveAdditive(const NodeArrays& arrays, const AdditiveMethod& method);

// Returns pi_h at the node's ln parities (NaN for a heading no region with a
// parity uses).
Eigen::VectorXd InternationalPricesAt(const NodeArrays& arrays, const Eigen::VectorXd& log_parity,
                                      PriceEquation prices);

// Returns x with two significant digits, as 1e-12 or 5.4e-08.
std::string ScientificText(double x);

// Returns the Geary-Khamis international prices solved directly: the
// stationary vector of a column-stochastic headings x headings matrix (see
// geary_khamis.cc); falls back to the prices at PPP = 1 when the solve does
// not give positive prices.
// `reciprocal_condition` (may be null) receives the LU estimate of the
// system's reciprocal condition number.
Eigen::VectorXd GearyKhamisDirectPrices(const AdditiveCells& cells,
                                        double* reciprocal_condition = nullptr);
// Below this reciprocal condition number the direct solve's relative error
// (up to about 1e-16 / rcond) could pass 1e-6, and the node fails.
inline constexpr double kMinReciprocalCondition = 1e-10;
bool GearyKhamisStart(const AdditiveCells& cells, Eigen::VectorXd* pi, std::string* failure);

// What the additive methods share as aggregation methods: they are
// additive and read no bilateral matrices.
class AdditiveAggregationMethod : public AggregationMethod {
 public:
  AggregationProperties Properties() const override {
    AggregationProperties properties;
    properties.additive = true;
    return properties;
  }
  BilateralOptions BilateralsNeeded() const override {
    BilateralOptions none;
    none.laspeyres_paasche = none.fisher = none.tornqvist = none.num_matched = false;
    return none;
  }
};

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_AGGREGATION_METHODS_ADDITIVE_H_
