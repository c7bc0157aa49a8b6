// geary-khamis (Geary 1958; Khamis 1972). The prices are solved directly as
// the stationary vector of a headings x headings matrix (a node has far
// fewer headings than a regional survey has regions, so this is cheap at
// thousands of regions and needs no iteration count that depends on how
// well the regions are linked); the shared fixed-point loop then checks the
// solution against the convergence test, which it passes within a step or two.
#include <Eigen/LU>

#include "aggregation/methods/additive.h"
#include "aggregation/methods/additive_text.h"

namespace paritas::internal {
namespace {

// pi_h = sum_r q_rh (p_rh / PPP_r) / sum_r q_rh = sum_r (e_rh / PPP_r) / sum_r q_rh
// (Geary 1958; Khamis 1972).
Eigen::VectorXd GearyKhamisPrices(const AdditiveCells& cells, const Eigen::VectorXd& ppp) {
  const Eigen::VectorXd deflator = (ppp.array() > 0).select(ppp.cwiseInverse(), 0.0);
  const Eigen::VectorXd deflated = cells.expenditure.transpose() * deflator;
  const Eigen::VectorXd quantity = cells.quantity.colwise().sum().transpose();
  return (quantity.array() > 0).select(deflated.cwiseQuotient(quantity), std::nan("")).matrix();
}

class GearyKhamis final : public AdditiveAggregationMethod {
 public:
  std::string_view Name() const override { return "geary-khamis"; }
  std::string_view Description() const override {
    return "Geary-Khamis: parities and international prices solved together (additive)";
  }
  std::string_view ReportTitle() const override { return "Geary\xE2\x80\x93Khamis"; }
  std::string_view ReportHtml() const override { return kGearyKhamisReportHtml; }
  AggregateParities Aggregate(const NodeArrays& arrays, const BilateralMatrices&) const override {
    return SolveAdditive(arrays, {Name(), &GearyKhamisPrices, &GearyKhamisStart});
  }
  Eigen::VectorXd InternationalPrices(const NodeArrays& arrays,
                                      const Eigen::VectorXd& log_parity) const override {
    return InternationalPricesAt(arrays, log_parity, &GearyKhamisPrices);
  }
};

}  // namespace

// With y_h = pi_h Q_h (Q_h = sum_r q_rh) the two equations give y = P y,
// P_hk = sum_r s_rh q_rk / Q_k, whose columns sum to 1 (the shares of a
// region sum to 1): y is P's stationary vector, unique when the regions are
// linked. Solved as (I - P) y = 0 with one row replaced by sum_h y_h = 1.
Eigen::VectorXd GearyKhamisDirectPrices(const AdditiveCells& cells, double* reciprocal_condition) {
  const Eigen::VectorXd quantity = cells.quantity.colwise().sum().transpose();
  std::vector<int> used;
  for (Eigen::Index h = 0; h < quantity.size(); ++h) {
    if (quantity(h) > 0) used.push_back(static_cast<int>(h));
  }
  Eigen::VectorXd pi = Eigen::VectorXd::Constant(quantity.size(), std::nan(""));
  if (used.empty()) return pi;
  const int m = static_cast<int>(used.size());
  const Eigen::MatrixXd share = cells.share(Eigen::all, used);
  const Eigen::MatrixXd q = cells.quantity(Eigen::all, used);
  Eigen::MatrixXd system = -(share.transpose() * q) * quantity(used).cwiseInverse().asDiagonal();
  system.diagonal().array() += 1.0;
  system.row(m - 1).setOnes();
  Eigen::VectorXd rhs = Eigen::VectorXd::Zero(m);
  rhs(m - 1) = 1.0;
  const Eigen::PartialPivLU<Eigen::MatrixXd> lu(system);
  if (reciprocal_condition != nullptr) *reciprocal_condition = lu.rcond();
  const Eigen::VectorXd y = lu.solve(rhs);
  if (!(y.array() > 0).all() || !y.allFinite()) {
    return GearyKhamisPrices(cells, (cells.total.array() > 0).cast<double>().matrix());
  }
  for (int k = 0; k < m; ++k) pi(used[k]) = y(k) / quantity(used[k]);
  return pi;
}

// An ill-conditioned system (a region or group linked to the rest through
// almost no spending) still passes the fixed-point check, which moves slowly
// along the weak direction, so the conditioning is tested here.
bool GearyKhamisStart(const AdditiveCells& cells, Eigen::VectorXd* pi, std::string* failure) {
  double reciprocal_condition = 1.0;
  *pi = GearyKhamisDirectPrices(cells, &reciprocal_condition);
  if (reciprocal_condition >= kMinReciprocalCondition) return true;
  *failure =
      "geary-khamis: the parities are not well determined (the system's reciprocal "
      "condition number is " +
      ScientificText(reciprocal_condition) +
      "); some regions are linked to the others through almost no spending";
  return false;
}

const AggregationMethod& GearyKhamisMethod() {
  static const GearyKhamis method;
  return method;
}

}  // namespace paritas::internal
