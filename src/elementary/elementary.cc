// Each heading is solved on its own, from its contiguous range of cells, so
// headings can run in parallel and every later stage reuses the cells as read.
// This file counts what lies behind each region and hands the heading to the
// method the options name; the methods live in methods/, one file each.
#include "paritas/elementary/elementary.h"

#include <cmath>

#include "paritas/base/text.h"

namespace paritas {

bool ElementaryOptions::IsValid(std::string* error) const {
  if (FindElementaryMethod(method) == nullptr) {
    *error = "elementary method '" + method + "' is not one of: " + JoinNames(ElementaryMethodNames());
    return false;
  }
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

HeadingParities ComputeHeadingParities(const HeadingInput& input) {
  const Survey& survey = *input.survey;
  HeadingParities out;
  out.heading = input.heading;
  const int num_regions = survey.num_regions();
  const HeadingRange& range = survey.heading_range[input.heading];
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
  const ElementaryMethod* method = FindElementaryMethod(input.options->method);
  if (method == nullptr) {
    out.identified = false;
    out.message = "unknown elementary method '" + input.options->method + "'";
    return out;
  }
  method->Compute(input, &out);
  return out;
}

HeadingParities ComputeHeadingParities(const Survey& survey, int heading,
                                       const ElementaryOptions& options,
                                       const std::vector<double>& reference_weights) {
  HeadingInput input;
  input.survey = &survey;
  input.heading = heading;
  input.options = &options;
  input.reference_weights = reference_weights;
  return ComputeHeadingParities(input);
}

}  // namespace paritas
