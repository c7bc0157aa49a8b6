#include "elementary/methods/cpd_heading.h"

#include <cmath>
#include <span>
#include <utility>
#include <vector>

namespace paritas::internal {

void CellBuffers::Clear() {
  region.clear();
  item.clear();
  log_price.clear();
  weight.clear();
  representative.clear();
}

void CellBuffers::KeepRegions(const std::vector<int>& group, int num_regions) {
  std::vector<uint8_t> keep(num_regions, 0);
  for (int r : group) keep[r] = 1;
  size_t kept = 0;
  for (size_t k = 0; k < region.size(); ++k) {
    if (!keep[region[k]]) continue;
    region[kept] = region[k];
    item[kept] = item[k];
    log_price[kept] = log_price[k];
    representative[kept] = representative[k];
    if (!weight.empty()) weight[kept] = weight[k];
    ++kept;
  }
  region.resize(kept);
  item.resize(kept);
  log_price.resize(kept);
  representative.resize(kept);
  if (!weight.empty()) weight.resize(kept);
}

void CollectCells(const HeadingInput& input, bool copies_for_multiplicity, CellBuffers* cells) {
  const Survey& survey = *input.survey;
  const HeadingRange& range = survey.heading_range[input.heading];
  const double representative_weight = input.options->representative_weight;
  const bool by_quote_weights =
      input.options->quote_weighted_cells && !survey.cells.weight.empty();
  const bool weighted =
      !input.item_weight.empty() || representative_weight != 1.0 || by_quote_weights;
  cells->Clear();
  if (input.item_weight.empty() && !weighted) {
    // Every cell once with weight 1 (the usual case): straight copies.
    const auto first = static_cast<size_t>(range.cell_begin);
    const auto last = static_cast<size_t>(range.cell_end);
    const std::span<const int> region(survey.cells.region);
    const std::span<const int> item(survey.cells.item);
    const std::span<const double> log_price(survey.cells.log_price);
    cells->region.assign(region.begin() + first, region.begin() + last);
    cells->item.resize(last - first);
    cells->representative.resize(last - first);
    for (size_t k = first; k < last; ++k) {
      cells->item[k - first] = item[k] - range.item_begin;
      cells->representative[k - first] = survey.cells.representative[k] ? 1.0 : 0.0;
    }
    cells->log_price.assign(log_price.begin() + first, log_price.begin() + last);
    return;
  }
  for (int64_t k = range.cell_begin; k < range.cell_end; ++k) {
    const double m = input.item_weight.empty() ? 1.0 : input.item_weight[survey.cells.item[k]];
    if (!(m > 0.0)) continue;
    const double base = (survey.cells.representative[k] ? representative_weight : 1.0) *
                        (by_quote_weights ? survey.cells.weight[k] : 1.0);
    const int copies = copies_for_multiplicity ? static_cast<int>(std::lround(m)) : 1;
    for (int c = 0; c < copies; ++c) {
      cells->region.push_back(survey.cells.region[k]);
      cells->item.push_back(survey.cells.item[k] - range.item_begin);
      cells->log_price.push_back(survey.cells.log_price[k]);
      cells->representative.push_back(survey.cells.representative[k] ? 1.0 : 0.0);
      if (weighted) cells->weight.push_back(copies_for_multiplicity ? base : base * m);
    }
  }
}

CpdResult FitCells(const HeadingInput& input, const CellBuffers& cells, CpdLoss loss) {
  const HeadingRange& range = input.survey->heading_range[input.heading];
  CpdData data;
  data.num_regions = input.survey->num_regions();
  data.num_items = range.num_items();
  data.region = cells.region;
  data.item = cells.item;
  data.log_price = cells.log_price;
  data.weight = cells.weight;
  CpdOptions cpd;
  cpd.loss = loss;
  cpd.robust_scale = input.options->robust_scale;
  if (input.normalise) cpd.reference_weights.assign(input.reference_weights.begin(), input.reference_weights.end());
  cpd.compute_standard_errors = input.options->compute_standard_errors;
  cpd.robust_errors = input.options->robust_errors;
  return FitCpd(data, cpd);
}

void FitHeadingCpd(const HeadingInput& input, CpdLoss loss, HeadingParities* out) {
  thread_local CellBuffers cells;
  const bool copies = loss != CpdLoss::kLeastSquares && !input.item_weight.empty();
  CollectCells(input, copies, &cells);
  if (cells.region.empty()) {
    out->identified = false;
    out->message = "no price quotes with positive weight";
    return;
  }
  CpdResult fit = FitCells(input, cells, loss);
  out->identified = fit.identified;
  out->groups = fit.groups;
  out->message = fit.message;
  if (!fit.identified && input.keep_largest_group && fit.groups.size() > 1) {
    cells.KeepRegions(fit.groups.front(), input.survey->num_regions());
    out->kept_largest_group = true;
    fit = FitCells(input, cells, loss);
  } else if (!fit.identified) {
    return;
  }
  if (!fit.identified) return;
  out->log_parity = std::move(fit.log_parity);
  out->log_se = std::move(fit.log_se);
  out->log_se_robust = std::move(fit.log_se_robust);
  out->sigma2 = fit.sigma2;
  out->degrees_of_freedom = fit.degrees_of_freedom;
  out->robust_scale_used = fit.robust_scale_used;
  // Residuals line up with the survey's cells only when every cell was fitted once.
  const bool every_cell_once = input.item_weight.empty() && !out->kept_largest_group;
  if (every_cell_once) {
    if (input.options->keep_cell_fitted) out->cell_fitted = std::move(fit.fitted);
    out->cell_residual = std::move(fit.residual);
  }
}

}  // namespace paritas::internal
