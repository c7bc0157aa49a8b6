// cprd: the Country-Product-Representativity-Dummy model, CPD with a dummy
// for representative cells: ln p_ri = a_r + b_i + g R_ri + e_ri.
//
// Solved with the Frisch-Waugh-Lovell theorem (Frisch and Waugh 1933;
// Lovell 1963) so the block solver of CPD serves unchanged: with ~ for the
// residual of a CPD fit (two-way dummies) of a variable,
//   g = sum w R~ y~ / sum w R~^2,   a, b = CPD fit of y - g R,
// and, by the partitioned inverse of the normal equations,
//   Var(a_r - ref) = s^2 c'(X'WX)^- c + (a_R,r - ref)^2 Var(g),
//   Var(g) = s^2 / sum w R~^2,  s^2 = sum w e^2 / (cells - regions - items),
// where a_R is the region effect of the CPD fit of R itself. The model: Sergeev
// (2003), and the Eurostat-OECD Methodological Manual on PPPs (2012), CPRD for
// basic headings (from memory; sections not checked).
#include <cmath>
#include <limits>

#include "elementary/methods/cpd_heading.h"

#include "base/not_a_number.h"

namespace paritas::internal {
namespace {

// Sum of w x y x z over the cells (w = 1 when unweighted).
double WeightedDot(const CellBuffers& cells, const Eigen::VectorXd& y, const Eigen::VectorXd& z) {
  double sum = 0.0;
  for (Eigen::Index k = 0; k < y.size(); ++k) {
    sum += (cells.weight.empty() ? 1.0 : cells.weight[k]) * y[k] * z[k];
  }
  return sum;
}

// The fit of y - g R and the standard errors with the dummy's share; false
// when the dummy is not identified (its CPD residual vanishes).
bool FitWithDummy(const HeadingInput& input, CellBuffers* cells, const CpdResult& plain,
                  HeadingParities* out) {
  CellBuffers dummy = *cells;
  dummy.log_price = cells->representative;
  ElementaryOptions quiet = *input.options;
  quiet.compute_standard_errors = false;
  quiet.robust_errors = RobustErrors::kOff;
  HeadingInput dummy_input = input;
  dummy_input.options = &quiet;
  const CpdResult on_dummy = FitCells(dummy_input, dummy, CpdLoss::kLeastSquares);
  if (!on_dummy.identified) return false;
  const double sxx = WeightedDot(*cells, on_dummy.residual, on_dummy.residual);
  if (!(sxx > 1e-12 * static_cast<double>(cells->region.size()))) return false;
  const double g = WeightedDot(*cells, on_dummy.residual, plain.residual) / sxx;
  for (size_t k = 0; k < cells->log_price.size(); ++k) {
    cells->log_price[k] -= g * cells->representative[k];
  }
  const CpdResult fit = FitCells(input, *cells, CpdLoss::kLeastSquares);
  if (!fit.identified) return false;
  out->log_parity = fit.log_parity;
  out->representativity_effect = g;
  const int df = fit.degrees_of_freedom - 1;
  out->degrees_of_freedom = df;
  out->log_se = Eigen::VectorXd::Constant(fit.log_parity.size(), kNaN);
  out->log_se_robust = out->log_se;
  if (df > 0) {
    const double ss = WeightedDot(*cells, fit.residual, fit.residual);
    const double s2 = ss / df;
    out->sigma2 = s2;
    const double var_g = s2 / sxx;
    out->representativity_se = std::sqrt(var_g);
    if (input.options->compute_standard_errors && fit.sigma2 > 0) {
      const Eigen::ArrayXd conditional = fit.log_se.array().square() * (s2 / fit.sigma2);
      out->log_se = (conditional + on_dummy.log_parity.array().square() * var_g).sqrt().matrix();
    }
  }
  // Fitted values of the full model: ln p - e.
  out->cell_residual = fit.residual;
  if (input.options->keep_cell_fitted) {
    out->cell_fitted = fit.fitted;
    for (Eigen::Index k = 0; k < out->cell_fitted.size(); ++k) {
      out->cell_fitted[k] += g * cells->representative[k];
    }
  }
  return true;
}

class Cprd final : public ElementaryMethod {
 public:
  std::string_view Name() const override { return "cprd"; }
  std::string_view Description() const override {
    return "CPD with a representativity dummy, reporting its effect per heading";
  }
  std::string_view ReportTitle() const override { return "Country-Product-Representativity-Dummy"; }
  std::string_view ReportHtml() const override {
    return "ln price = region effect + item effect + representativity effect \xC3\x97 (cell flagged "
           "representative) + error, by least squares: items a region flags as representative of its "
           "spending may be dearer or cheaper than others, and the dummy keeps that from the region "
           "effects. The effect and its standard error are listed per heading. Eurostat and OECD, "
           "<i>Methodological Manual on Purchasing Power Parities</i> (2012).";
  }
  ElementaryProperties Properties() const override {
    return {.uses_representativity = true,
            .gives_standard_errors = true,
            .gives_cell_residuals = true,
            .weighs_cells = true,
            .gives_representativity_effect = true};
  }
  void Compute(const HeadingInput& input, HeadingParities* out) const override;
};

void Cprd::Compute(const HeadingInput& input, HeadingParities* out) const {
  // The dummy replaces the representative weight: cells weigh 1 (or their
  // resampling multiplicity).
  ElementaryOptions options = *input.options;
  options.representative_weight = 1.0;
  options.robust_errors = RobustErrors::kOff;
  HeadingInput own = input;
  own.options = &options;
  thread_local CellBuffers cells;
  CollectCells(own, false, &cells);
  if (cells.region.empty()) {
    out->identified = false;
    out->message = "no price quotes with positive weight";
    return;
  }
  CpdResult plain = FitCells(own, cells, CpdLoss::kLeastSquares);
  out->identified = plain.identified;
  out->groups = plain.groups;
  if (!plain.identified && input.keep_largest_group && plain.groups.size() > 1) {
    cells.KeepRegions(plain.groups.front(), input.survey->num_regions());
    out->kept_largest_group = true;
    plain = FitCells(own, cells, CpdLoss::kLeastSquares);
  }
  if (!plain.identified) return;
  for (double r : cells.representative) out->num_cells_representative += r > 0 ? 1 : 0;
  out->message = plain.message;
  if (!FitWithDummy(own, &cells, plain, out)) {
    // Flags constant within every item (or none at all): the dummy is
    // absorbed by the item effects, and CPRD is CPD.
    out->log_parity = plain.log_parity;
    out->log_se = plain.log_se;
    out->log_se_robust = plain.log_se_robust;
    out->sigma2 = plain.sigma2;
    out->degrees_of_freedom = plain.degrees_of_freedom;
    if (input.options->keep_cell_fitted) out->cell_fitted = plain.fitted;
    out->cell_residual = plain.residual;
  }
  if (!input.item_weight.empty() || out->kept_largest_group) {
    out->cell_fitted.resize(0);
    out->cell_residual.resize(0);
  }
}

}  // namespace

const ElementaryMethod& CprdMethod() {
  static const Cprd method;
  return method;
}

}  // namespace paritas::internal
