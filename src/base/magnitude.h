// The sizes of input figures the arithmetic holds. Prices, spending,
// population, quote weights and quantities, external parities and price
// indices enter sums over regions and headings and ratios between regions;
// within [1e-100, 1e100] a sum of a million of them, a ratio of two or the
// ratio's square stays finite and keeps its digits (doubles reach about
// 1.8e308, normal ones down to 2.2e-308: IEEE 754). Only ratios of such a
// figure enter the parities, so a figure outside the range is a units
// mistake, reported as one rather than carried into an infinite or
// truncated result.
#ifndef PARITAS_BASE_MAGNITUDE_H_
#define PARITAS_BASE_MAGNITUDE_H_

#include <string>
#include <string_view>

#include "paritas/base/text.h"

namespace paritas::internal {

inline constexpr double kLargestInputFigure = 1e100;
inline constexpr double kSmallestInputFigure = 1e-100;

// True when a positive figure lies in the range (NaN and 0 do not).
inline bool WithinInputRange(double value) {
  return value >= kSmallestInputFigure && value <= kLargestInputFigure;
}

// What is wrong with the size of a non-negative figure `value` read from
// `text`, or empty when nothing is (0 is left to the caller's rule).
// `advice` replaces the default one (other units).
inline std::string MagnitudeProblem(std::string_view what, std::string_view text, double value,
                                    std::string_view advice = {}) {
  const bool large = value > kLargestInputFigure;
  if (!large && !(value > 0 && value < kSmallestInputFigure)) return {};
  std::string problem = std::string(what) + " " + QuoteValue(Trim(text));
  problem += large ? " is beyond 1e100, where sums and ratios of such figures overflow; "
                   : " is positive but nearer 0 than 1e-100, where ratios of such figures overflow "
                     "or lose digits; ";
  if (!advice.empty()) return problem.append(advice);
  return problem + (large ? "state it in larger units" : "state it in smaller units");
}

}  // namespace paritas::internal

#endif  // PARITAS_BASE_MAGNITUDE_H_
