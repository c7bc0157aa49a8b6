// Cells are sorted by counting sort on dense indices: linear in the number of
// cells, and a stable order that is the same on every run.
#include "cell_prices.h"

#include <cmath>
#include <numeric>

#include "paritas/cpd.h"

namespace paritas::internal {
namespace {

std::vector<int64_t> CountingOrder(const std::vector<int32_t>& key, int num_keys,
                                   const std::vector<int64_t>& input_order) {
  std::vector<int64_t> start(num_keys + 1, 0);
  for (int64_t i : input_order) ++start[key[i] + 1];
  std::partial_sum(start.begin(), start.end(), start.begin());
  std::vector<int64_t> output(input_order.size());
  for (int64_t i : input_order) output[start[key[i]]++] = i;
  return output;
}

}  // namespace

void SortCells(const std::vector<int32_t>& region, const std::vector<int32_t>& item,
               const std::vector<CellMoments>& moments, int num_regions, int num_items,
               CellPrices* cells) {
  std::vector<int64_t> order(region.size());
  std::iota(order.begin(), order.end(), 0);
  order = CountingOrder(region, num_regions, order);
  order = CountingOrder(item, num_items, order);
  const size_t n = order.size();
  cells->region.resize(n);
  cells->item.resize(n);
  cells->log_price.resize(n);
  cells->log_sd.resize(n);
  cells->log_min.resize(n);
  cells->log_max.resize(n);
  cells->num_quotes.resize(n);
  cells->representative.resize(n);
  for (size_t k = 0; k < n; ++k) {
    const int64_t i = order[k];
    const CellMoments& m = moments[i];
    cells->region[k] = region[i];
    cells->item[k] = item[i];
    cells->log_price[k] = m.mean;
    cells->log_sd[k] = m.num_quotes > 1 ? std::sqrt(m.m2 / (m.num_quotes - 1)) : 0.0;
    cells->log_min[k] = m.min;
    cells->log_max[k] = m.max;
    cells->num_quotes[k] = m.num_quotes;
    cells->representative[k] = m.representative;
  }
}

void FillHeadingRanges(Survey* survey) {
  const int num_headings = survey->num_headings();
  survey->heading_range.assign(num_headings, HeadingRange());
  // Items are grouped by heading, so each heading is one item range.
  std::vector<int> first_item(num_headings, -1), end_item(num_headings, -1);
  for (int i = 0; i < survey->num_items(); ++i) {
    const int h = survey->item_heading[i];
    if (first_item[h] < 0) first_item[h] = i;
    end_item[h] = i + 1;
  }
  int next_item = 0;
  for (int h = 0; h < num_headings; ++h) {
    HeadingRange& range = survey->heading_range[h];
    range.item_begin = first_item[h] < 0 ? next_item : first_item[h];
    range.item_end = first_item[h] < 0 ? next_item : end_item[h];
    next_item = range.item_end;
  }
  const CellPrices& cells = survey->cells;
  int64_t k = 0;
  for (int h = 0; h < num_headings; ++h) {
    HeadingRange& range = survey->heading_range[h];
    range.cell_begin = k;
    while (k < static_cast<int64_t>(cells.size()) && cells.item[k] < range.item_end) ++k;
    range.cell_end = k;
  }
}

}  // namespace paritas::internal

namespace paritas {

std::vector<std::vector<int>> HeadingRegionGroups(const Survey& survey, int heading) {
  const HeadingRange& range = survey.heading_range[heading];
  std::vector<int> region(survey.cells.region.begin() + range.cell_begin,
                          survey.cells.region.begin() + range.cell_end);
  std::vector<int> item(range.num_cells());
  for (int64_t k = 0; k < range.num_cells(); ++k) {
    item[k] = survey.cells.item[range.cell_begin + k] - range.item_begin;
  }
  return LinkedRegionGroups(survey.num_regions(), range.num_items(), region, item);
}

}  // namespace paritas
