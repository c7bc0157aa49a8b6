// The quiet NaN that marks a missing number (no parity, no price, no
// interval) throughout the library, defined once.
#ifndef PARITAS_BASE_NOT_A_NUMBER_H_
#define PARITAS_BASE_NOT_A_NUMBER_H_

#include <limits>

namespace paritas {

inline constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

}  // namespace paritas

#endif  // PARITAS_BASE_NOT_A_NUMBER_H_
