// Equality of short byte strings without a call into memcmp: codes are a few
// bytes long, and a library call per comparison costs more than the compare.
#ifndef PARITAS_INTERNAL_BASE_EQUAL_BYTES_H_
#define PARITAS_INTERNAL_BASE_EQUAL_BYTES_H_

#include <cstdint>
#include <cstring>
#include <string_view>

namespace paritas::internal {

// True when `a` and `b` hold the same bytes. Up to 16 bytes two overlapping
// word loads per side settle it; longer strings go to memcmp.
inline bool EqualBytes(std::string_view a, std::string_view b) {
  const size_t n = a.size();
  if (n != b.size()) return false;
  const char* p = a.data();
  const char* q = b.data();
  if (n >= 8) {
    if (n > 16) return std::memcmp(p, q, n) == 0;
    uint64_t p0, p1, q0, q1;
    std::memcpy(&p0, p, 8);
    std::memcpy(&q0, q, 8);
    std::memcpy(&p1, p + n - 8, 8);
    std::memcpy(&q1, q + n - 8, 8);
    return ((p0 ^ q0) | (p1 ^ q1)) == 0;
  }
  if (n >= 4) {
    uint32_t p0, p1, q0, q1;
    std::memcpy(&p0, p, 4);
    std::memcpy(&q0, q, 4);
    std::memcpy(&p1, p + n - 4, 4);
    std::memcpy(&q1, q + n - 4, 4);
    return ((p0 ^ q0) | (p1 ^ q1)) == 0;
  }
  for (size_t i = 0; i < n; ++i) {
    if (p[i] != q[i]) return false;
  }
  return true;
}

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_BASE_EQUAL_BYTES_H_
