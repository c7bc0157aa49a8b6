// ikle-dikhanov-balk (Ikle 1972; Dikhanov 1994; Balk 1996): the additive
// method whose international prices are share-weighted harmonic means, so
// small regions weigh as much as large ones in the price structure. No
// linear form exists, so it runs the shared fixed-point loop, started from
// the Geary-Khamis prices (close to its own in practice).
#include <cmath>

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

class IkleDikhanovBalk final : public AggregationMethod {
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
  AggregateParities Aggregate(const NodeArrays& arrays, const BilateralMatrices&) const override {
    return SolveAdditive(arrays, {Name(), &IkleDikhanovBalkPrices, &GearyKhamisDirectPrices});
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
