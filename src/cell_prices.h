// Accumulating quotes into cells, and putting the cells in survey order.
#ifndef PARITAS_SRC_CELL_PRICES_H_
#define PARITAS_SRC_CELL_PRICES_H_

#include <cstdint>
#include <vector>

#include "paritas/survey.h"

namespace paritas::internal {

// Running moments of the log quotes of one cell (Welford's update; chunks are
// combined with Chan, Golub and LeVeque's formula, so the result does not
// depend on how the file was split).
struct CellMoments {
  int32_t num_quotes = 0;
  double mean = 0.0;
  double m2 = 0.0;
  double min = 0.0;
  double max = 0.0;
  uint8_t representative = 0;

  void Add(double log_price, bool is_representative) {
    ++num_quotes;
    const double delta = log_price - mean;
    mean += delta / num_quotes;
    m2 += delta * (log_price - mean);
    if (num_quotes == 1 || log_price < min) min = log_price;
    if (num_quotes == 1 || log_price > max) max = log_price;
    representative |= static_cast<uint8_t>(is_representative);
  }
  void Combine(const CellMoments& other) {
    if (other.num_quotes == 0) return;
    if (num_quotes == 0) {
      *this = other;
      return;
    }
    const double n = num_quotes + other.num_quotes;
    const double delta = other.mean - mean;
    mean += delta * other.num_quotes / n;
    m2 += other.m2 + delta * delta * num_quotes * other.num_quotes / n;
    min = other.min < min ? other.min : min;
    max = other.max > max ? other.max : max;
    num_quotes += other.num_quotes;
    representative |= other.representative;
  }
};

// Builds the survey's sorted cell arrays from unsorted cells: `region` and
// `item` are final indices; items must already be ordered by heading. Uses
// two stable counting sorts (by region, then by item), linear in the cells.
void SortCells(const std::vector<int32_t>& region, const std::vector<int32_t>& item,
               const std::vector<CellMoments>& moments, int num_regions, int num_items,
               CellPrices* cells);

// Fills survey->heading_range from the sorted cells and item_heading.
void FillHeadingRanges(Survey* survey);

}  // namespace paritas::internal

#endif  // PARITAS_SRC_CELL_PRICES_H_
