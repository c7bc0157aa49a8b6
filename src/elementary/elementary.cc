// Each heading is solved on its own, from its contiguous range of cells, so
// headings can run in parallel and every later stage reuses the cells as read.
#include "paritas/elementary/elementary.h"

#include <cmath>

#include "paritas/aggregation/bilateral_matrix.h"
#include "paritas/compute/compute.h"
#include "paritas/aggregation/geks.h"

namespace paritas {

bool ElementaryOptions::IsValid(std::string* error) const {
  if (!(representative_weight > 0) || !std::isfinite(representative_weight)) {
    *error = "representative_weight must be a positive number";
    return false;
  }
  if (std::isnan(robust_scale)) {
    *error = "robust_scale must be a number (<= 0 to estimate it)";
    return false;
  }
  return true;
}

void HeadingPriceArrays(const Survey& survey, int heading, Eigen::MatrixXd* log_price,
                        Eigen::MatrixXd* present) {
  const HeadingRange& range = survey.heading_range[heading];
  log_price->setZero(survey.num_regions(), range.num_items());
  present->setZero(survey.num_regions(), range.num_items());
  for (int64_t k = range.cell_begin; k < range.cell_end; ++k) {
    const int r = survey.cells.region[k];
    const int i = survey.cells.item[k] - range.item_begin;
    (*log_price)(r, i) = survey.cells.log_price[k];
    (*present)(r, i) = 1.0;
  }
}

HeadingParities ComputeHeadingParities(const Survey& survey, int heading,
                                       const ElementaryOptions& options,
                                       const std::vector<double>& reference_weights) {
  HeadingParities out;
  out.heading = heading;
  const int num_regions = survey.num_regions();
  const HeadingRange& range = survey.heading_range[heading];
  const double nan = std::nan("");
  out.log_parity = Eigen::VectorXd::Constant(num_regions, nan);
  out.log_se = Eigen::VectorXd::Constant(num_regions, nan);
  out.log_se_robust = Eigen::VectorXd::Constant(num_regions, nan);
  out.num_items = Eigen::VectorXi::Zero(num_regions);
  out.num_quotes = Eigen::VectorXi::Zero(num_regions);
  out.num_cells = range.num_cells();
  std::vector<uint8_t> item_seen(range.num_items(), 0);
  for (int64_t k = range.cell_begin; k < range.cell_end; ++k) {
    const int r = survey.cells.region[k];
    out.num_items(r) += 1;
    out.num_quotes(r) += survey.cells.num_quotes[k];
    item_seen[survey.cells.item[k] - range.item_begin] = 1;
  }
  out.num_regions_priced = static_cast<int>((out.num_items.array() > 0).count());
  for (uint8_t seen : item_seen) out.num_items_priced += seen;
  if (out.num_cells == 0) {
    out.message = "no price quotes";
    return out;
  }

  if (options.method == ElementaryMethod::kJevonsGeks) {
    Eigen::MatrixXd log_price, present;
    HeadingPriceArrays(survey, heading, &log_price, &present);
    Eigen::MatrixXd jevons = AllPairsJevons(log_price, present, nullptr);
    // Regions that priced nothing have no bilaterals at all, not even with
    // themselves, so GEKS leaves them out.
    for (int r = 0; r < num_regions; ++r) {
      if (out.num_items(r) == 0) jevons(r, r) = nan;
    }
    const GeksResult geks = Geks(jevons.array().log().matrix());
    out.identified = geks.identified;
    out.groups = geks.groups;
    if (geks.identified) {
      out.log_parity = geks.log_parity;
      std::vector<double> weights = reference_weights;
      if (weights.empty()) weights.assign(num_regions, 1.0);
      NormaliseLogParities(weights, &out.log_parity);
    }
    return out;
  }

  // CPD and robust CPD.
  const int64_t n = range.num_cells();
  std::vector<int> region(n), item(n);
  std::vector<double> weight;
  for (int64_t k = 0; k < n; ++k) {
    region[k] = survey.cells.region[range.cell_begin + k];
    item[k] = survey.cells.item[range.cell_begin + k] - range.item_begin;
  }
  if (options.representative_weight != 1.0) {
    weight.resize(n);
    for (int64_t k = 0; k < n; ++k) {
      weight[k] = survey.cells.representative[range.cell_begin + k] ? options.representative_weight : 1.0;
    }
  }
  CpdData data;
  data.num_regions = num_regions;
  data.num_items = range.num_items();
  data.region = region;
  data.item = item;
  data.log_price = std::span<const double>(survey.cells.log_price.data() + range.cell_begin, n);
  data.weight = weight;
  CpdOptions cpd;
  cpd.loss = options.method == ElementaryMethod::kRobustCpd ? options.robust_loss : CpdLoss::kLeastSquares;
  cpd.robust_scale = options.robust_scale;
  cpd.reference_weights = reference_weights;
  cpd.compute_standard_errors = options.compute_standard_errors;
  cpd.compute_robust_standard_errors = options.compute_robust_standard_errors;
  CpdResult fit = FitCpd(data, cpd);
  out.identified = fit.identified;
  out.groups = fit.groups;
  out.message = fit.message;
  if (!fit.identified) return out;
  out.log_parity = fit.log_parity;
  out.log_se = fit.log_se;
  out.log_se_robust = fit.log_se_robust;
  out.cell_fitted = fit.fitted;
  out.cell_residual = fit.residual;
  out.sigma2 = fit.sigma2;
  out.degrees_of_freedom = fit.degrees_of_freedom;
  out.robust_scale_used = fit.robust_scale_used;
  return out;
}

}  // namespace paritas
