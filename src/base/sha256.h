// SHA-256 (FIPS 180-4) for the run record's input digests. The compression
// function exists twice, portable C++ and x86 SHA extensions, picked once per
// hasher at run time so one binary runs everywhere and is fast where it can be.
#ifndef PARITAS_INTERNAL_BASE_SHA256_H_
#define PARITAS_INTERNAL_BASE_SHA256_H_

#include <cstddef>
#include <cstdint>
#include <string>
#include <string_view>

namespace paritas::internal {

// Incremental SHA-256: Update any number of times, then HexDigest once.
class Sha256 {
 public:
  // Starts an empty message; uses the SHA extensions when the CPU has them and
  // Sha256ForcePortable(true) is not in effect.
  Sha256();

  // Appends `size` bytes at `data` to the message; may be called repeatedly
  // with pieces of any size, including zero.
  void Update(const void* data, size_t size);

  // Finishes the message and returns its digest as 64 lowercase hex
  // characters. The hasher is spent afterwards: call it once.
  std::string HexDigest();

  // Returns true when this hasher uses the x86 SHA extensions.
  bool uses_sha_extensions() const { return uses_sha_extensions_; }

 private:
  // Compresses `num_blocks` consecutive 64-byte blocks into `state`.
  using CompressFunction = void (*)(uint32_t state[8], const uint8_t* blocks,
                                    size_t num_blocks);

  CompressFunction compress_;
  bool uses_sha_extensions_;
  // Chaining value H0..H7; starts at the FIPS 180-4 initial hash value.
  uint32_t state_[8];
  // Bytes of a partial block awaiting 64; buffer_size_ is in [0, 64).
  uint8_t buffer_[64];
  size_t buffer_size_ = 0;
  // Message length so far in bytes (the padding stores it in bits).
  uint64_t num_bytes_ = 0;
  bool finished_ = false;
};

// Makes hashers constructed afterwards use the portable compression function
// (true) or pick by CPU again (false, the default). For tests, which check that
// both paths agree; thread-safe but global.
void Sha256ForcePortable(bool force_portable);

// Returns true when the CPU has the SHA extensions (always false off x86-64).
bool Sha256CpuHasShaExtensions();

// Hashes the file at `path` by streaming it in 1 MiB blocks. On failure
// returns false with "<path>: cannot read file: <strerror>" in *error.
bool Sha256File(const std::string& path, std::string* hex_digest, std::string* error);

// Returns the SHA-256 of `data` as 64 lowercase hex characters.
std::string Sha256Hex(std::string_view data);

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_BASE_SHA256_H_
