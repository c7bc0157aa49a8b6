// Putting the survey together from the loader's state: regions, headings
// and items in their final order, the quotes renumbered to it and turned
// into cells, and the expenditure table.
#include <algorithm>
#include <cmath>
#include <numeric>
#include <string>
#include <vector>

#include "survey/cell_prices.h"
#include "survey/loader_state.h"

namespace paritas::internal {
namespace {

std::vector<int> SortedOrder(const CodeTable& table) {
  std::vector<int> order(table.size());
  std::iota(order.begin(), order.end(), 0);
  std::sort(order.begin(), order.end(),
            [&](int a, int b) { return table.Code(a) < table.Code(b); });
  return order;
}

// Puts the regions in their survey order (regions.csv order, else sorted
// codes); returns the new index of each state region.
std::vector<int> OrderRegions(const LoadState& state, Survey* survey) {
  std::vector<int> region_order(state.regions.size());
  std::iota(region_order.begin(), region_order.end(), 0);
  if (!state.regions_fixed) region_order = SortedOrder(state.regions);
  std::vector<int> region_new(state.regions.size());
  std::vector<std::string> region_codes;
  for (size_t k = 0; k < region_order.size(); ++k) {
    region_new[region_order[k]] = static_cast<int>(k);
    region_codes.emplace_back(state.regions.Code(region_order[k]));
  }
  survey->regions = CodeTable::FromCodes(region_codes);
  survey->region_name.assign(region_codes.size(), "");
  survey->region_population.assign(region_codes.size(), std::nan(""));
  survey->has_population = false;
  for (size_t r = 0; r < state.region_name.size(); ++r) {
    survey->region_name[region_new[r]] = state.region_name[r];
    survey->region_population[region_new[r]] = state.region_population[r];
    survey->has_population = survey->has_population || !std::isnan(state.region_population[r]);
  }
  return region_new;
}

// Puts the headings in classification order, else sorted codes under a flat
// root; returns the new index of each state heading.
std::vector<int> OrderHeadings(const LoadState& state, Survey* survey) {
  std::vector<int> heading_new(state.headings.size(), -1);
  if (state.headings_fixed) {
    survey->classification = state.config->classification;
    for (int h = 0; h < state.headings.size(); ++h) heading_new[h] = h;
  } else {
    const std::vector<int> order = SortedOrder(state.headings);
    std::vector<std::string> codes;
    for (size_t k = 0; k < order.size(); ++k) {
      heading_new[order[k]] = static_cast<int>(k);
      codes.emplace_back(state.headings.Code(order[k]));
    }
    survey->classification = Classification::Flat(codes);
  }
  survey->heading_codes = survey->classification.HeadingCodes();
  return heading_new;
}

// Puts the items in order by heading, then code; items whose heading never
// got stated (all their rows rejected) are dropped (new index -1). Returns
// the new index of each state item.
std::vector<int> OrderItems(const LoadState& state, const std::vector<int>& heading_new,
                            Survey* survey) {
  std::vector<int> item_order;
  for (int i = 0; i < state.items.size(); ++i) {
    if (state.item_heading[i] >= 0) item_order.push_back(i);
  }
  std::sort(item_order.begin(), item_order.end(), [&](int a, int b) {
    const int ha = heading_new[state.item_heading[a]], hb = heading_new[state.item_heading[b]];
    if (ha != hb) return ha < hb;
    return state.items.Code(a) < state.items.Code(b);
  });
  std::vector<int> item_new(state.items.size(), -1);
  std::vector<std::string> item_codes;
  survey->item_heading.clear();
  survey->item_description.clear();
  survey->item_unit.clear();
  for (size_t k = 0; k < item_order.size(); ++k) {
    const int i = item_order[k];
    item_new[i] = static_cast<int>(k);
    item_codes.emplace_back(state.items.Code(i));
    survey->item_heading.push_back(heading_new[state.item_heading[i]]);
    survey->item_description.push_back(state.item_description[i]);
    survey->item_unit.push_back(state.item_unit[i]);
  }
  survey->items = CodeTable::FromCodes(item_codes);
  return item_new;
}

// Renumbers the quotes to the survey's regions and items and builds the
// cells from them; the quotes are released.
void BuildCells(const std::vector<int>& region_new, const std::vector<int>& item_new,
                int num_threads, LoadState* state, Survey* survey) {
  const int64_t num_quotes = static_cast<int64_t>(state->quotes.size());
  int32_t* quote_region = state->quotes.region.data();
  int32_t* quote_item = state->quotes.item.data();
#pragma omp parallel for schedule(static) num_threads(num_threads)
  for (int64_t q = 0; q < num_quotes; ++q) {
    quote_region[q] = region_new[quote_region[q]];
    quote_item[q] = item_new[quote_item[q]];
  }
  CellsFromQuotes(&state->quotes, survey->num_regions(), survey->num_items(), num_threads,
                  &survey->cells);  // empties the quotes
  FillHeadingRanges(survey);
  survey->num_quotes = state->num_quotes;
}

}  // namespace

void BuildSurvey(LoadState* state, int num_threads, Survey* survey) {
  const std::vector<int> region_new = OrderRegions(*state, survey);
  const std::vector<int> heading_new = OrderHeadings(*state, survey);
  const std::vector<int> item_new = OrderItems(*state, heading_new, survey);
  BuildCells(region_new, item_new, num_threads, state, survey);
  survey->expenditure =
      Eigen::MatrixXd::Constant(survey->num_regions(), survey->num_headings(), std::nan(""));
  survey->national_weights = state->national_weights;
  for (const auto& s : state->spending) {
    if (s.region < 0) {
      survey->expenditure.col(heading_new[s.heading]).setConstant(s.value);
    } else {
      survey->expenditure(region_new[s.region], heading_new[s.heading]) = s.value;
    }
  }
}

}  // namespace paritas::internal
