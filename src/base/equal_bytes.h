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

// Returns the bytes of a string of `n` <= 8 bytes as one word, read with at
// most two loads and never outside [p, p + n). Two strings of the same length
// give the same word exactly when they hold the same bytes (from 4 bytes on
// the two loads overlap; below, every byte lands in its own lane).
inline uint64_t ShortWord(const char* p, size_t n) {
  if (n >= 4) {
    uint32_t lo, hi;
    std::memcpy(&lo, p, 4);
    std::memcpy(&hi, p + n - 4, 4);
    return lo | (uint64_t{hi} << 32);
  }
  if (n == 0) return 0;
  const auto byte = [p](size_t i) { return uint64_t{static_cast<unsigned char>(p[i])}; };
  return byte(0) | (byte(n >> 1) << 8) | (byte(n - 1) << 16);
}

// Mixes two words into one: the high and low halves of their 128-bit
// product, xored (a "multiply-fold"; one multiplication).
inline uint64_t MultiplyFold(uint64_t a, uint64_t b) {
  __extension__ typedef unsigned __int128 Wide;  // GCC and Clang; quiet under -Wpedantic.
  const Wide product = static_cast<Wide>(a) * b;
  return static_cast<uint64_t>(product) ^ static_cast<uint64_t>(product >> 64);
}

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_BASE_EQUAL_BYTES_H_
