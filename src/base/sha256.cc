// SHA-256 after FIPS 180-4 (sections 4.1.2, 4.2.2, 5.1.1, 6.2). The SHA-NI
// path is compiled for that one function with a target attribute, so the rest
// of the library keeps the baseline instruction set and runs on any x86-64.
#include "base/sha256.h"

#include <fcntl.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <cerrno>
#include <cstdlib>
#include <cstring>
#include <memory>
#include <utility>

#if defined(__x86_64__)
#include <immintrin.h>
#endif

namespace paritas::internal {
namespace {

// FIPS 180-4 section 4.2.2: the first 32 bits of the fractional parts of the
// cube roots of the first 64 primes. Aligned for the 16-byte SIMD loads.
alignas(16) constexpr uint32_t kRoundConstants[64] = {
    0x428a2f98, 0x71374491, 0xb5c0fbcf, 0xe9b5dba5, 0x3956c25b, 0x59f111f1, 0x923f82a4,
    0xab1c5ed5, 0xd807aa98, 0x12835b01, 0x243185be, 0x550c7dc3, 0x72be5d74, 0x80deb1fe,
    0x9bdc06a7, 0xc19bf174, 0xe49b69c1, 0xefbe4786, 0x0fc19dc6, 0x240ca1cc, 0x2de92c6f,
    0x4a7484aa, 0x5cb0a9dc, 0x76f988da, 0x983e5152, 0xa831c66d, 0xb00327c8, 0xbf597fc7,
    0xc6e00bf3, 0xd5a79147, 0x06ca6351, 0x14292967, 0x27b70a85, 0x2e1b2138, 0x4d2c6dfc,
    0x53380d13, 0x650a7354, 0x766a0abb, 0x81c2c92e, 0x92722c85, 0xa2bfe8a1, 0xa81a664b,
    0xc24b8b70, 0xc76c51a3, 0xd192e819, 0xd6990624, 0xf40e3585, 0x106aa070, 0x19a4c116,
    0x1e376c08, 0x2748774c, 0x34b0bcb5, 0x391c0cb3, 0x4ed8aa4a, 0x5b9cca4f, 0x682e6ff3,
    0x748f82ee, 0x78a5636f, 0x84c87814, 0x8cc70208, 0x90befffa, 0xa4506ceb, 0xbef9a3f7,
    0xc67178f2};

// FIPS 180-4 section 5.3.3: the first 32 bits of the fractional parts of the
// square roots of the first 8 primes.
constexpr uint32_t kInitialHash[8] = {0x6a09e667, 0xbb67ae85, 0x3c6ef372, 0xa54ff53a,
                                      0x510e527f, 0x9b05688c, 0x1f83d9ab, 0x5be0cd19};

// Large enough that read() calls cost nothing next to hashing, small enough to
// stay in L2 while it is hashed.
constexpr size_t kFileBlockBytes = size_t{1} << 20;

std::atomic<bool> force_portable{false};

inline uint32_t RotateRight(uint32_t x, int n) { return (x >> n) | (x << (32 - n)); }

inline uint32_t LoadBigEndian32(const uint8_t* p) {
  return (uint32_t{p[0]} << 24) | (uint32_t{p[1]} << 16) | (uint32_t{p[2]} << 8) | uint32_t{p[3]};
}

// One round of FIPS 180-4 section 6.2.2 step 3. Instead of shifting eight
// variables each round, the caller rotates the argument order, so a round
// touches only d and h.
inline void PortableRound(uint32_t a, uint32_t b, uint32_t c, uint32_t& d, uint32_t e, uint32_t f,
                          uint32_t g, uint32_t& h, uint32_t constant_plus_word) {
  const uint32_t big_sigma1 = RotateRight(e, 6) ^ RotateRight(e, 11) ^ RotateRight(e, 25);
  const uint32_t choose = g ^ (e & (f ^ g));  // Equals (e & f) ^ (~e & g).
  const uint32_t t1 = h + big_sigma1 + choose + constant_plus_word;
  const uint32_t big_sigma0 = RotateRight(a, 2) ^ RotateRight(a, 13) ^ RotateRight(a, 22);
  const uint32_t majority = (a & b) | (c & (a | b));  // Equals (a&b) ^ (a&c) ^ (b&c).
  d += t1;
  h = t1 + big_sigma0 + majority;
}

// Returns W[t] for t >= 16 (FIPS 180-4 section 6.2.2 step 1) and stores it in
// the 16-word ring w, which keeps the schedule in registers.
inline uint32_t NextScheduleWord(uint32_t w[16], int t) {
  const uint32_t w15 = w[(t - 15) & 15];
  const uint32_t w2 = w[(t - 2) & 15];
  const uint32_t sigma0 = RotateRight(w15, 7) ^ RotateRight(w15, 18) ^ (w15 >> 3);
  const uint32_t sigma1 = RotateRight(w2, 17) ^ RotateRight(w2, 19) ^ (w2 >> 10);
  return w[t & 15] += sigma0 + w[(t - 7) & 15] + sigma1;
}

inline uint32_t ScheduleWord(uint32_t w[16], int t) {
  return t < 16 ? w[t] : NextScheduleWord(w, t);
}

void CompressPortable(uint32_t state[8], const uint8_t* blocks, size_t num_blocks) {
  for (size_t block = 0; block < num_blocks; ++block, blocks += 64) {
    uint32_t w[16];
    for (int t = 0; t < 16; ++t) w[t] = LoadBigEndian32(blocks + 4 * t);
    uint32_t a = state[0], b = state[1], c = state[2], d = state[3];
    uint32_t e = state[4], f = state[5], g = state[6], h = state[7];
    // Fully unrolled so every ring index is a constant.
#pragma GCC unroll 8
    for (int t = 0; t < 64; t += 8) {
      PortableRound(a, b, c, d, e, f, g, h, kRoundConstants[t] + ScheduleWord(w, t));
      PortableRound(h, a, b, c, d, e, f, g, kRoundConstants[t + 1] + ScheduleWord(w, t + 1));
      PortableRound(g, h, a, b, c, d, e, f, kRoundConstants[t + 2] + ScheduleWord(w, t + 2));
      PortableRound(f, g, h, a, b, c, d, e, kRoundConstants[t + 3] + ScheduleWord(w, t + 3));
      PortableRound(e, f, g, h, a, b, c, d, kRoundConstants[t + 4] + ScheduleWord(w, t + 4));
      PortableRound(d, e, f, g, h, a, b, c, kRoundConstants[t + 5] + ScheduleWord(w, t + 5));
      PortableRound(c, d, e, f, g, h, a, b, kRoundConstants[t + 6] + ScheduleWord(w, t + 6));
      PortableRound(b, c, d, e, f, g, h, a, kRoundConstants[t + 7] + ScheduleWord(w, t + 7));
    }
    state[0] += a;
    state[1] += b;
    state[2] += c;
    state[3] += d;
    state[4] += e;
    state[5] += f;
    state[6] += g;
    state[7] += h;
  }
}

#if defined(__x86_64__)

#define PARITAS_SHA_TARGET __attribute__((target("sha,sse4.1"), always_inline))

// Runs rounds 4g..4g+3 and advances the message schedule. The four registers
// m[0..3] hold schedule words in a ring: m[g % 4] has W[4g..4g+3].
// sha256msg1 and sha256msg2 compute the small sigma terms of FIPS 180-4
// equation 6.2.2 step 1 for four words at once; the alignr supplies W[t-7].
template <int kGroup>
PARITAS_SHA_TARGET inline void ShaNiGroup(__m128i m[4], __m128i* abef, __m128i* cdgh,
                                          const uint8_t* block, __m128i byte_swap) {
  constexpr int kCurrent = kGroup % 4;
  constexpr int kNext = (kGroup + 1) % 4;
  constexpr int kPrevious = (kGroup + 3) % 4;
  if constexpr (kGroup < 4) {
    m[kCurrent] = _mm_shuffle_epi8(
        _mm_loadu_si128(reinterpret_cast<const __m128i*>(block + 16 * kGroup)), byte_swap);
  }
  __m128i message = _mm_add_epi32(
      m[kCurrent], _mm_load_si128(reinterpret_cast<const __m128i*>(kRoundConstants + 4 * kGroup)));
  *cdgh = _mm_sha256rnds2_epu32(*cdgh, *abef, message);
  if constexpr (kGroup >= 3 && kGroup <= 14) {
    m[kNext] = _mm_add_epi32(m[kNext], _mm_alignr_epi8(m[kCurrent], m[kPrevious], 4));
    m[kNext] = _mm_sha256msg2_epu32(m[kNext], m[kCurrent]);
  }
  // sha256rnds2 takes its two round words from the low half.
  message = _mm_shuffle_epi32(message, 0x0E);
  *abef = _mm_sha256rnds2_epu32(*abef, *cdgh, message);
  if constexpr (kGroup >= 1 && kGroup <= 12) {
    m[kPrevious] = _mm_sha256msg1_epu32(m[kPrevious], m[kCurrent]);
  }
}

template <int... kGroups>
PARITAS_SHA_TARGET inline void ShaNiRounds(std::integer_sequence<int, kGroups...>, __m128i m[4],
                                           __m128i* abef, __m128i* cdgh, const uint8_t* block,
                                           __m128i byte_swap) {
  (ShaNiGroup<kGroups>(m, abef, cdgh, block, byte_swap), ...);
}

#undef PARITAS_SHA_TARGET

// The SHA instructions keep the state as two registers ABEF and CDGH (lane 3
// first), so the state is permuted in once per call and out at the end.
__attribute__((target("sha,sse4.1"))) void CompressShaNi(uint32_t state[8],
                                                         const uint8_t* blocks,
                                                         size_t num_blocks) {
  const __m128i byte_swap = _mm_set_epi64x(0x0c0d0e0f08090a0bULL, 0x0405060700010203ULL);
  __m128i dcba = _mm_loadu_si128(reinterpret_cast<const __m128i*>(state));
  __m128i hgfe = _mm_loadu_si128(reinterpret_cast<const __m128i*>(state + 4));
  const __m128i badc = _mm_shuffle_epi32(dcba, 0xB1);
  const __m128i efgh = _mm_shuffle_epi32(hgfe, 0x1B);
  __m128i abef = _mm_alignr_epi8(badc, efgh, 8);
  __m128i cdgh = _mm_blend_epi16(efgh, badc, 0xF0);
  for (size_t block = 0; block < num_blocks; ++block, blocks += 64) {
    const __m128i abef_saved = abef;
    const __m128i cdgh_saved = cdgh;
    __m128i m[4];
    ShaNiRounds(std::make_integer_sequence<int, 16>(), m, &abef, &cdgh, blocks, byte_swap);
    abef = _mm_add_epi32(abef, abef_saved);
    cdgh = _mm_add_epi32(cdgh, cdgh_saved);
  }
  const __m128i feba = _mm_shuffle_epi32(abef, 0x1B);
  const __m128i dchg = _mm_shuffle_epi32(cdgh, 0xB1);
  dcba = _mm_blend_epi16(feba, dchg, 0xF0);
  hgfe = _mm_alignr_epi8(dchg, feba, 8);
  _mm_storeu_si128(reinterpret_cast<__m128i*>(state), dcba);
  _mm_storeu_si128(reinterpret_cast<__m128i*>(state + 4), hgfe);
}

#endif  // defined(__x86_64__)

}  // namespace

bool Sha256CpuHasShaExtensions() {
#if defined(__x86_64__)
  // Every CPU with SHA has SSE4.1 today; checking both keeps the promise made
  // by the target attribute.
  static const bool has_sha = __builtin_cpu_supports("sha") && __builtin_cpu_supports("sse4.1");
  return has_sha;
#else
  return false;
#endif
}

void Sha256ForcePortable(bool force) { force_portable.store(force, std::memory_order_relaxed); }

Sha256::Sha256() : compress_(CompressPortable), uses_sha_extensions_(false) {
#if defined(__x86_64__)
  if (Sha256CpuHasShaExtensions() && !force_portable.load(std::memory_order_relaxed)) {
    compress_ = CompressShaNi;
    uses_sha_extensions_ = true;
  }
#endif
  std::memcpy(state_, kInitialHash, sizeof(state_));
}

void Sha256::Update(const void* data, size_t size) {
  const uint8_t* bytes = static_cast<const uint8_t*>(data);
  num_bytes_ += size;
  if (buffer_size_ > 0) {
    const size_t num_copied = std::min(size, sizeof(buffer_) - buffer_size_);
    std::memcpy(buffer_ + buffer_size_, bytes, num_copied);
    buffer_size_ += num_copied;
    bytes += num_copied;
    size -= num_copied;
    if (buffer_size_ < sizeof(buffer_)) return;
    compress_(state_, buffer_, 1);
    buffer_size_ = 0;
  }
  // Whole blocks go straight from the caller's memory, in one call, so large
  // inputs are never copied.
  const size_t num_blocks = size / 64;
  if (num_blocks > 0) compress_(state_, bytes, num_blocks);
  bytes += 64 * num_blocks;
  size -= 64 * num_blocks;
  if (size > 0) std::memcpy(buffer_, bytes, size);
  buffer_size_ = size;
}

std::string Sha256::HexDigest() {
  // Calling twice would hash the padding into the state again.
  if (finished_) std::abort();
  finished_ = true;
  // FIPS 180-4 section 5.1.1: a 1 bit, zeros up to 56 mod 64 bytes, then the
  // length in bits as a 64-bit big-endian number.
  const uint64_t num_bits = num_bytes_ * 8;
  uint8_t padding[128] = {0x80};
  const size_t num_padding_bytes = (buffer_size_ < 56 ? 56 : 120) - buffer_size_;
  for (int i = 0; i < 8; ++i) {
    padding[num_padding_bytes + i] = static_cast<uint8_t>(num_bits >> (56 - 8 * i));
  }
  Update(padding, num_padding_bytes + 8);

  static constexpr char kHexDigits[] = "0123456789abcdef";
  std::string hex(64, '0');
  for (int word = 0; word < 8; ++word) {
    for (int nibble = 0; nibble < 8; ++nibble) {
      hex[8 * word + nibble] = kHexDigits[(state_[word] >> (28 - 4 * nibble)) & 0xF];
    }
  }
  return hex;
}

bool Sha256File(const std::string& path, std::string* hex_digest, std::string* error) {
  const auto fail = [&](int error_number) {
    *error = path + ": cannot read file: " + std::strerror(error_number);
    return false;
  };
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return fail(errno);
  // Readahead helps when the file is not yet in the page cache.
  ::posix_fadvise(fd, 0, 0, POSIX_FADV_SEQUENTIAL);
  const std::unique_ptr<uint8_t[]> block(new uint8_t[kFileBlockBytes]);
  Sha256 hasher;
  while (true) {
    const ssize_t num_read = ::read(fd, block.get(), kFileBlockBytes);
    if (num_read == 0) break;
    if (num_read < 0) {
      if (errno == EINTR) continue;
      const int read_errno = errno;
      ::close(fd);
      return fail(read_errno);
    }
    hasher.Update(block.get(), static_cast<size_t>(num_read));
  }
  ::close(fd);
  *hex_digest = hasher.HexDigest();
  return true;
}

std::string Sha256Hex(std::string_view data) {
  Sha256 hasher;
  hasher.Update(data.data(), data.size());
  return hasher.HexDigest();
}

}  // namespace paritas::internal
