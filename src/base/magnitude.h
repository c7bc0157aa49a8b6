// The sizes of figures the arithmetic holds. Prices, spending, population,
// quote weights and quantities, external parities and price indices enter
// ratios between regions, products of those ratios (a Laspeyres times a
// Paasche) and sums over regions and headings. Within [1e-30, 1e30] a
// ratio stays within 1e±60 and a product of two within 1e±120, far inside
// what a double holds (about 1.8e308; normal numbers down to 2.2e-308:
// IEEE 754); at a ratio of 1e180 between two regions Fisher indices
// overflowed and a spanning tree lost a region's parity. The largest money
// amounts of a survey in the smallest currency unit (regional spending of
// 1e19 in a currency of hyperinflation) stay well inside the range. Only
// ratios of these figures enter the parities, so a figure outside it is a
// units mistake, reported as one rather than carried into an infinite or
// truncated result.
#ifndef PARITAS_BASE_MAGNITUDE_H_
#define PARITAS_BASE_MAGNITUDE_H_

#include <string>
#include <string_view>

#include "paritas/base/text.h"

namespace paritas::internal {

// A range of positive figures, with its bounds as messages print them.
struct FigureRange {
  double smallest;
  double largest;
  const char* smallest_text;
  const char* largest_text;
};

// Figures read from the survey's files and price indices.
inline constexpr FigureRange kInputRange{1e-30, 1e30, "1e-30", "1e30"};
// Parities read back from a run folder: what the inputs can give (ratios of
// two input figures, times an index ratio under carry) with room to spare.
inline constexpr FigureRange kResultRange{1e-200, 1e200, "1e-200", "1e200"};
// Heading parities carried to a later period (a benchmark's, moved by index
// ratios) before they are aggregated: what a run computes from figures within
// kInputRange (ratios of two), so that a ratio between two regions stays
// within 1e120 and a product of two such ratios within 1e240. On a
// two-region survey with opposite extremes in two headings every aggregation
// method held parities of 1e-77 and 1e77; at 1e78 the Paasche-Laspeyres
// ratio overflowed (its spread warning was lost) and the spanning tree
// reported the regions "not linked".
inline constexpr FigureRange kCarriedRange{1e-60, 1e60, "1e-60", "1e60"};

// True when a figure lies in the range (NaN and 0 do not).
inline bool WithinRange(double value, const FigureRange& range = kInputRange) {
  return value >= range.smallest && value <= range.largest;
}

// What is wrong with the size of a non-negative figure `value` read from
// `text`, or empty when nothing is (0 is left to the caller's rule).
// `advice` replaces the default one (other units).
inline std::string MagnitudeProblem(std::string_view what, std::string_view text, double value,
                                    std::string_view advice = {},
                                    const FigureRange& range = kInputRange) {
  const bool large = value > range.largest;
  if (!large && !(value > 0 && value < range.smallest)) return {};
  std::string problem = std::string(what) + " " + QuoteValue(Trim(text));
  problem += large ? std::string(" is beyond ") + range.largest_text
                   : std::string(" is positive but nearer 0 than ") + range.smallest_text;
  problem += ", where ratios between regions and their products overflow or lose digits; ";
  if (!advice.empty()) return problem.append(advice);
  return problem + (large ? "state it in larger units" : "state it in smaller units");
}

}  // namespace paritas::internal

#endif  // PARITAS_BASE_MAGNITUDE_H_
