// ikle-dikhanov-balk (Ikle 1972; Dikhanov 1994; Balk 1996): the additive
// method whose international prices are share-weighted harmonic means, so
// small regions weigh as much as large ones in the price structure. No
// linear form exists. The plain fixed point contracts at the rate of the
// second eigenvalue of its Jacobian, which comes close to 1 when a group of
// regions is linked to the rest through little spending, and then both
// stalls and, worse, takes steps small enough to pass a step-size test far
// from the solution; so the prices are found by Newton's method on the
// headings' ln prices (from the Geary-Khamis prices) and the shared loop
// only checks them.
#include <Eigen/LU>
#include <algorithm>
#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "aggregation/methods/additive.h"
#include "aggregation/methods/additive_text.h"

namespace paritas::internal {
namespace {

// 1 / pi_h = sum_r s_rh (PPP_r / p_rh) / sum_r s_rh, s_rh = e_rh / E_r: the
// share-weighted harmonic mean of the deflated heading parities p_rh / PPP_r
// (Balk 1996, J. Official Statistics 12(2), the Ikle system; Dikhanov 1994).
Eigen::VectorXd IkleDikhanovBalkPrices(const AdditiveCells& cells, const Eigen::VectorXd& ppp) {
  const Eigen::VectorXd weight = cells.share.colwise().sum().transpose();
  const Eigen::VectorXd inverse = cells.share.cwiseProduct(cells.inverse_price).transpose() * ppp;
  return (weight.array() > 0).select(weight.cwiseQuotient(inverse), std::nan("")).matrix();
}

// One evaluation of the fixed-point map G on y = ln pi (the used headings):
// F = G(y) - y and, when asked, the Jacobian of G, J = V W with
// W_rk = pi_k q_rk / sum_h pi_h q_rh and V_hr = s_rh PPP_r / p_rh / sum_r (same),
// both row-stochastic, so J 1 = 1 (G commutes with a common shift of y).
struct Evaluation {
  Eigen::VectorXd residual;
  Eigen::MatrixXd jacobian;
};

Evaluation Evaluate(const Eigen::MatrixXd& quantity, const Eigen::MatrixXd& share_over_price,
                    const Eigen::VectorXd& total, const Eigen::VectorXd& weight,
                    const Eigen::VectorXd& y, bool with_jacobian) {
  const Eigen::VectorXd pi = y.array().exp().matrix();
  Eigen::MatrixXd w = quantity * pi.asDiagonal();
  const Eigen::VectorXd real = w.rowwise().sum();
  const Eigen::VectorXd ppp = (total.array() > 0).select(total.cwiseQuotient(real), 0.0);
  Eigen::MatrixXd v = (ppp.asDiagonal() * share_over_price).transpose();
  const Eigen::VectorXd inverse = v.rowwise().sum();
  Evaluation out;
  out.residual = (weight.array().log() - inverse.array().log()).matrix() - y;
  if (!with_jacobian) return out;
  const Eigen::VectorXd inverse_real = (total.array() > 0).select(real.cwiseInverse(), 0.0);
  w = inverse_real.asDiagonal() * w;
  v = inverse.cwiseInverse().asDiagonal() * v;
  out.jacobian = v * w;
  return out;
}

// Newton's method for F(y) = 0 from the Geary-Khamis prices: (I - J) d = F
// is singular along 1, so (I - J + 1 1'/m) d = F is solved instead (the
// added term only shifts every ln price alike, which changes no parity; a
// rank-revealing solve would drop the weak direction that matters here);
// steps are halved (up to 12 times) until they reduce max |F|, and Newton
// gives up when none does. Converged when the
// Newton step itself is below the loop's tolerance (a short, halved step
// proves nothing); a region linked to the others through almost no
// spending makes I - J nearly singular, and then it may fail.
bool Newton(const AdditiveCells& cells, Eigen::VectorXd* pi, std::string* failure) {
  std::vector<int> used;
  for (Eigen::Index h = 0; h < pi->size(); ++h) {
    if (std::isfinite((*pi)(h)) && (*pi)(h) > 0) used.push_back(static_cast<int>(h));
  }
  if (used.empty()) return true;
  const int m = static_cast<int>(used.size());
  const Eigen::MatrixXd quantity = cells.quantity(Eigen::all, used);
  const Eigen::MatrixXd share_over_price =
      cells.share.cwiseProduct(cells.inverse_price)(Eigen::all, used);
  const Eigen::VectorXd weight = cells.share(Eigen::all, used).colwise().sum().transpose();
  Eigen::VectorXd y = (*pi)(used).array().log().matrix();
  Evaluation current = Evaluate(quantity, share_over_price, cells.total, weight, y, true);
  double newton_step = std::numeric_limits<double>::infinity();
  constexpr int kMaxSteps = 50;
  constexpr double kMaxLogStep = 0.5;
  for (int step = 0; step < kMaxSteps; ++step) {
    if (current.residual.lpNorm<Eigen::Infinity>() == 0.0) return true;
    Eigen::MatrixXd system = Eigen::MatrixXd::Constant(m, m, 1.0 / m) - current.jacobian;
    system.diagonal().array() += 1.0;
    const Eigen::VectorXd direction = system.partialPivLu().solve(current.residual);
    if (!direction.allFinite()) break;
    // W is row-stochastic: no ln parity moves more than the step's largest entry.
    newton_step = direction.lpNorm<Eigen::Infinity>();
    if (newton_step < kAdditiveTolerance) {
      (*pi)(used) = (y + direction).array().exp().matrix();
      return true;
    }
    // A trust region: a step along the weak direction can be large and the
    // map is far from linear over it.
    double length = std::min(1.0, kMaxLogStep / newton_step);
    bool decreased = false;
    for (int halving = 0; halving < 12 && !decreased; ++halving, length *= 0.5) {
      const Evaluation trial =
          Evaluate(quantity, share_over_price, cells.total, weight, y + length * direction, false);
      decreased = trial.residual.allFinite() && trial.residual.lpNorm<Eigen::Infinity>() <
                                                    current.residual.lpNorm<Eigen::Infinity>();
      if (decreased) y += length * direction;
    }
    if (!decreased) break;  // stalled: leave it to the fixed-point loop
    (*pi)(used) = y.array().exp().matrix();
    current = Evaluate(quantity, share_over_price, cells.total, weight, y, true);
  }
  *failure =
      "Newton's last step would move a ln international price by " + ScientificText(newton_step);
  return false;
}

// Newton from the Geary-Khamis prices; where it does not converge (along a
// weak link its linear model can lead it away), the shared loop starts from
// the Geary-Khamis prices and either converges by its own test or fails.
bool NewtonStart(const AdditiveCells& cells, Eigen::VectorXd* pi, std::string*) {
  *pi = GearyKhamisDirectPrices(cells);
  const Eigen::VectorXd geary_khamis = *pi;
  std::string newton_failure;
  if (!Newton(cells, pi, &newton_failure)) *pi = geary_khamis;
  return true;
}

class IkleDikhanovBalk final : public AdditiveAggregationMethod {
 public:
  std::string_view Name() const override { return "ikle-dikhanov-balk"; }
  std::string_view Description() const override {
    return "Ikle-Dikhanov-Balk: additive, share-weighted harmonic international prices";
  }
  std::string_view ReportTitle() const override {
    return "Ikl\xC3\xA9\xE2\x80\x93"
           "Dikhanov\xE2\x80\x93"
           "Balk";
  }
  std::string_view ReportHtml() const override { return kIkleDikhanovBalkReportHtml; }
  AggregateParities Aggregate(const NodeArrays& arrays, const BilateralMatrices&) const override {
    return SolveAdditive(arrays, {Name(), &IkleDikhanovBalkPrices, &NewtonStart});
  }
  Eigen::VectorXd InternationalPrices(const NodeArrays& arrays,
                                      const Eigen::VectorXd& log_parity) const override {
    return InternationalPricesAt(arrays, log_parity, &IkleDikhanovBalkPrices);
  }
};

}  // namespace

const AggregationMethod& IkleDikhanovBalkMethod() {
  static const IkleDikhanovBalk method;
  return method;
}

}  // namespace paritas::internal
