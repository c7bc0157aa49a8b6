// cpd: the Country-Product-Dummy model by least squares (Summers 1973).
#include "elementary/methods/cpd_heading.h"

namespace paritas::internal {
namespace {

class Cpd final : public ElementaryMethod {
 public:
  std::string_view Name() const override { return "cpd"; }
  std::string_view Description() const override {
    return "Country-Product-Dummy least squares, with standard errors";
  }
  std::string_view ReportTitle() const override { return "Country-Product-Dummy"; }
  std::string_view ReportHtml() const override {
    return "ln price = region effect + item effect + error, fitted by least squares; the region effects are "
           "the heading's parities and their standard errors follow from the regression. Summers, R. (1973), "
           "\xE2\x80\x9CInternational price comparisons based upon incomplete data\xE2\x80\x9D, <i>Review of "
           "Income and Wealth</i> 19(1).";
  }
  ElementaryProperties Properties() const override {
    return {.uses_representativity = true,
            .gives_standard_errors = true,
            .gives_cell_residuals = true,
            .weighs_cells = true};
  }
  void Compute(const HeadingInput& input, HeadingParities* out) const override {
    FitHeadingCpd(input, CpdLoss::kLeastSquares, out);
  }
};

}  // namespace

const ElementaryMethod& CpdMethod() {
  static const Cpd method;
  return method;
}

}  // namespace paritas::internal
