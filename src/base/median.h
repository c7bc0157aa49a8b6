// The median of a buffer of numbers, by partial selection.
#ifndef PARITAS_BASE_MEDIAN_H_
#define PARITAS_BASE_MEDIAN_H_

#include <algorithm>
#include <cstddef>
#include <vector>

#include "base/not_a_number.h"

namespace paritas {

// Returns the median of `values`, reordering them (std::nth_element, linear
// time): the middle value, or the mean of the two middle values for an even
// count; NaN when empty.
inline double MedianInPlace(std::vector<double>* values) {
  if (values->empty()) return kNaN;
  const size_t mid = values->size() / 2;
  std::nth_element(values->begin(), values->begin() + mid, values->end());
  double median = (*values)[mid];
  if (values->size() % 2 == 0) {
    median = 0.5 * (median + *std::max_element(values->begin(), values->begin() + mid));
  }
  return median;
}

}  // namespace paritas

#endif  // PARITAS_BASE_MEDIAN_H_
