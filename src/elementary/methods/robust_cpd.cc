// robust-cpd: the CPD model with Huber's loss (or Cauchy's), so that single
// wrong prices weigh less; solved by Ceres Solver (robust_cpd.h).
#include "elementary/methods/cpd_heading.h"

namespace paritas::internal {
namespace {

class RobustCpd final : public ElementaryMethod {
 public:
  std::string_view Name() const override { return "robust-cpd"; }
  std::string_view Description() const override {
    return "CPD with Huber's loss, so that single wrong prices weigh less";
  }
  std::string_view ReportTitle() const override { return "robust Country-Product-Dummy"; }
  std::string_view ReportHtml() const override {
    return "The CPD model of Summers (1973, <i>Review of Income and Wealth</i> 19(1)) fitted with Huber's loss, "
           "so single wrong prices weigh less: Huber, P. J. (1964), \xE2\x80\x9CRobust estimation of a location "
           "parameter\xE2\x80\x9D, <i>Annals of Mathematical Statistics</i> 35(1).";
  }
  ElementaryProperties Properties() const override {
    return {.uses_representativity = true,
            .gives_standard_errors = true,
            .gives_cell_residuals = true,
            .weighs_cells = true};
  }
  void Compute(const HeadingInput& input, HeadingParities* out) const override {
    FitHeadingCpd(input, input.options->robust_loss, out);
  }
};

}  // namespace

const ElementaryMethod& RobustCpdMethod() {
  static const RobustCpd method;
  return method;
}

}  // namespace paritas::internal
