// Accumulating quotes into cells, and putting the cells in survey order.
#ifndef PARITAS_INTERNAL_SURVEY_CELL_PRICES_H_
#define PARITAS_INTERNAL_SURVEY_CELL_PRICES_H_

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <vector>

#include "base/uninitialised_vector.h"
#include "paritas/survey/survey.h"

namespace paritas::internal {

// Running moments of the log quotes of one cell (Welford's update, applied
// in file order; with quote weights, West's weighted form: D. H. D. West,
// 1979, "Updating mean and variance estimates: an improved method", Comm.
// ACM 22(9), 532-535).
struct CellMoments {
  int32_t num_quotes = 0;
  double mean = 0.0;
  double m2 = 0.0;  // sum of (weighted) squared deviations from the mean
  double min = 0.0;
  double max = 0.0;
  uint8_t representative = 0;
  double sum_weight = 0.0;     // weighted only: sum of w
  double sum_weight_sq = 0.0;  // weighted only: sum of w^2

  void Add(double log_price, bool is_representative) {
    ++num_quotes;
    const double delta = log_price - mean;
    mean += delta / num_quotes;
    m2 += delta * (log_price - mean);
    Extremes(log_price, is_representative);
  }

  // Adds a quote of weight w > 0: mean = sum w x / sum w.
  void AddWeighted(double log_price, bool is_representative, double w) {
    ++num_quotes;
    sum_weight += w;
    sum_weight_sq += w * w;
    const double delta = log_price - mean;
    mean += delta * (w / sum_weight);
    m2 += w * delta * (log_price - mean);
    Extremes(log_price, is_representative);
  }

  // Standard deviation of the log quotes: sqrt(m2 / (n - 1)) unweighted;
  // weighted, sqrt(m2 / (V1 - V2 / V1)) with V1 = sum w, V2 = sum w^2 (the
  // unbiased form for reliability weights, numpy.cov's `aweights`; equal
  // weights give the unweighted value). 0 for one quote.
  double LogSd(bool weighted) const {
    if (num_quotes < 2) return 0.0;
    const double denominator =
        weighted ? sum_weight - sum_weight_sq / sum_weight : static_cast<double>(num_quotes - 1);
    return denominator > 0 ? std::sqrt(std::max(m2, 0.0) / denominator) : 0.0;
  }

 private:
  void Extremes(double log_price, bool is_representative) {
    if (num_quotes == 1 || log_price < min) min = log_price;
    if (num_quotes == 1 || log_price > max) max = log_price;
    representative |= static_cast<uint8_t>(is_representative);
  }
};

// Quotes as read, in file order (region and item indices of the table being
// built: chunk-local while parsing, final survey indices for CellsFromQuotes).
// The arrays are sized before the chunks of a block write their rows into
// them, so resize(n) leaves the new elements unwritten (no zero-fill).
struct QuoteArrays {
  UninitialisedVector<int32_t> region;
  UninitialisedVector<int32_t> item;
  UninitialisedVector<double> log_price;
  UninitialisedVector<uint8_t> representative;  // empty when no price file has a flag column
  // Quote weights (> 0); empty when no price file has a weight column (a
  // quote of a file without one weighs 1).
  UninitialisedVector<double> weight;
  // Hash of the row's fields (all columns), for finding rows repeated field
  // for field (the rows' lines are kept apart, in runs: LoadState::
  // quote_lines); emptied once duplicates are handled.
  UninitialisedVector<uint64_t> row_hash;

  size_t size() const { return region.size(); }
};

// Calls f on each of the six quote arrays of `quotes` (QuoteArrays, or any
// struct with members of those names, such as the reader's slices of them),
// in QuoteArrays' order: for what is done to all of them alike (their pages'
// advice and mapping, where they lie).
template <typename Quotes, typename F>
void ForEachQuoteArray(Quotes& quotes, F&& f) {
  f(quotes.region);
  f(quotes.item);
  f(quotes.log_price);
  f(quotes.representative);
  f(quotes.weight);
  f(quotes.row_hash);
}

// Builds the survey's cell arrays from the quotes: a stable counting sort on
// the cell key (item, region) puts the quotes of each cell together in file
// order, and each cell's moments are accumulated in that order, so cells do
// not depend on how the file was split for parsing. Items must already be
// ordered by heading. Linear in the number of quotes; `num_threads` (>= 1)
// threads share the work without changing the result. Empties `quotes`, as
// soon as they are no longer needed (before the cell arrays are allocated
// when the cells are counted densely), so that quotes and cells are not held
// at once.
void CellsFromQuotes(QuoteArrays* quotes, int num_regions, int num_items, int num_threads,
                     CellPrices* cells);

// Fills survey->heading_range from the sorted cells and item_heading.
void FillHeadingRanges(Survey* survey);

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_SURVEY_CELL_PRICES_H_
