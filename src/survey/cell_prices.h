// Accumulating quotes into cells, and putting the cells in survey order.
#ifndef PARITAS_INTERNAL_SURVEY_CELL_PRICES_H_
#define PARITAS_INTERNAL_SURVEY_CELL_PRICES_H_

#include <cstdint>
#include <vector>

#include "paritas/survey/survey.h"

namespace paritas::internal {

// Running moments of the log quotes of one cell (Welford's update, applied
// in file order).
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
};

// Quotes as read, in file order (region and item indices of the table being
// built: chunk-local while parsing, final survey indices for CellsFromQuotes).
struct QuoteArrays {
  std::vector<int32_t> region;
  std::vector<int32_t> item;
  std::vector<double> log_price;
  std::vector<uint8_t> representative;  // empty when prices.csv has no flag column
  // Hash of the row's fields (all columns) and its line, for finding rows
  // repeated field for field; emptied once duplicates are handled.
  std::vector<uint64_t> row_hash;
  std::vector<int64_t> line;

  size_t size() const { return region.size(); }
};

// Builds the survey's cell arrays from the quotes: a stable counting sort on
// the cell key (item, region) puts the quotes of each cell together in file
// order, and each cell's moments are accumulated in that order, so cells do
// not depend on how the file was split for parsing. Items must already be
// ordered by heading. Linear in the number of quotes; `num_threads` (>= 1)
// threads share the work without changing the result.
void CellsFromQuotes(const QuoteArrays& quotes, int num_regions, int num_items, int num_threads,
                     CellPrices* cells);

// Fills survey->heading_range from the sorted cells and item_heading.
void FillHeadingRanges(Survey* survey);

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_SURVEY_CELL_PRICES_H_
