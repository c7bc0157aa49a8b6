// The common form of a number read without a general parser, inline so
// that a reader of millions of prices pays no call for it (ParseNumber
// starts with it).
#ifndef PARITAS_INTERNAL_BASE_PLAIN_DECIMAL_H_
#define PARITAS_INTERNAL_BASE_PLAIN_DECIMAL_H_

#include <cstddef>
#include <cstdint>
#include <string_view>

namespace paritas::internal {

// Reads the common form of a number, digits with an optional point and more
// digits ("12", "28.6609"), when the result is exact without a general
// parser: the digits, read as a whole number m, are at most 2^53 and the
// point stands at most 22 places from the end, so m and 10^places are
// doubles exactly and their quotient, rounded once by the division, is the
// nearest double to the text, which is what std::from_chars returns (Clinger
// 1990, "How to read floating point numbers accurately", PLDI, section 4:
// the fast path). `decimal` is the decimal mark. Returns false, leaving
// *value alone, for any other text.
inline bool ParsePlainDecimal(std::string_view text, char decimal, double* value) {
  static constexpr double kPowersOfTen[] = {1e0,  1e1,  1e2,  1e3,  1e4,  1e5,  1e6,  1e7,
                                            1e8,  1e9,  1e10, 1e11, 1e12, 1e13, 1e14, 1e15,
                                            1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22};
  const char* p = text.data();
  const char* const end = p + text.size();
  // At most 19 digits, so the whole number fits 64 bits.
  if (text.empty() || text.size() > 20) return false;
  uint64_t whole = 0;
  const char* const first = p;
  while (p < end && static_cast<unsigned>(*p - '0') < 10) whole = whole * 10 + (*p++ - '0');
  if (p == first) return false;
  size_t places = 0;
  if (p < end) {
    if (*p != decimal) return false;
    const char* const point = ++p;
    while (p < end && static_cast<unsigned>(*p - '0') < 10) whole = whole * 10 + (*p++ - '0');
    places = static_cast<size_t>(p - point);
    if (p != end || places == 0) return false;
  }
  if (text.size() - (places > 0) > 19 || whole > (uint64_t{1} << 53)) return false;
  *value = static_cast<double>(whole) / kPowersOfTen[places];
  return true;
}

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_BASE_PLAIN_DECIMAL_H_
