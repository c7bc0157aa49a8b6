// Recording errors planted into a synthetic survey, shared by the outlier
// screen's tests and its measurement program (outlier_screen_bench): a cell
// whose quotes are all off by one factor (a price keyed in the wrong unit or
// with the decimal point moved), and a region that priced only one item of a
// heading (the case a least-squares residual cannot see).
#ifndef PARITAS_BENCH_PLANTED_ERRORS_H_
#define PARITAS_BENCH_PLANTED_ERRORS_H_

#include <algorithm>
#include <cstddef>
#include <vector>

#include "synthetic_survey.h"

namespace paritas::synthetic {

// Returns the items (generator indices) region `region` priced in heading
// `heading`, ascending.
inline std::vector<int> ItemsPriced(const SyntheticSurvey& survey, int region, int heading) {
  std::vector<int> items;
  for (size_t q = 0; q < survey.quote_price.size(); ++q) {
    const int item = survey.quote_item[q];
    if (survey.quote_region[q] != region || survey.item_heading[item] != heading) continue;
    if (items.empty() || items.back() != item) items.push_back(item);
  }
  return items;
}

// Returns the number of regions that priced `item`.
inline int NumRegionsPricing(const SyntheticSurvey& survey, int item) {
  int count = 0, last_region = -1;
  for (size_t q = 0; q < survey.quote_price.size(); ++q) {
    if (survey.quote_item[q] != item || survey.quote_region[q] == last_region) continue;
    last_region = survey.quote_region[q];
    ++count;
  }
  return count;
}

// Drops the quotes for which `drop(region, item)` is true.
template <typename Predicate>
void DropQuotes(Predicate drop, SyntheticSurvey* survey) {
  size_t kept = 0;
  for (size_t q = 0; q < survey->quote_price.size(); ++q) {
    if (drop(survey->quote_region[q], survey->quote_item[q])) continue;
    survey->quote_region[kept] = survey->quote_region[q];
    survey->quote_item[kept] = survey->quote_item[q];
    survey->quote_price[kept] = survey->quote_price[q];
    survey->quote_representative[kept] = survey->quote_representative[q];
    ++kept;
  }
  survey->quote_region.resize(kept);
  survey->quote_item.resize(kept);
  survey->quote_price.resize(kept);
  survey->quote_representative.resize(kept);
}

// Drops every quote of `region` in `heading` except those of `keep_item`, so
// the region prices one item of the heading.
inline void KeepOnlyItem(int region, int heading, int keep_item, SyntheticSurvey* survey) {
  DropQuotes(
      [&](int r, int i) { return r == region && survey->item_heading[i] == heading && i != keep_item; },
      survey);
}

// Drops every quote of `item` outside `regions`, so only they price it.
inline void KeepItemOnlyIn(int item, const std::vector<int>& regions, SyntheticSurvey* survey) {
  DropQuotes(
      [&](int r, int i) { return i == item && std::find(regions.begin(), regions.end(), r) == regions.end(); },
      survey);
}

// Multiplies quotes of the cell (region, item) by `factor`: all of them when
// `quote` < 0, otherwise only the cell's quote number `quote` (0-based).
// Returns the number of quotes changed.
inline int ScaleQuotes(int region, int item, double factor, int quote, SyntheticSurvey* survey) {
  int changed = 0, seen = 0;
  for (size_t q = 0; q < survey->quote_price.size(); ++q) {
    if (survey->quote_region[q] != region || survey->quote_item[q] != item) continue;
    if (quote < 0 || seen == quote) {
      survey->quote_price[q] *= factor;
      ++changed;
    }
    ++seen;
  }
  return changed;
}

}  // namespace paritas::synthetic

#endif  // PARITAS_BENCH_PLANTED_ERRORS_H_
