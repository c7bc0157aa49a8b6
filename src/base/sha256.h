// SHA-256 (FIPS 180-4) for the run record's input digests, computed by
// OpenSSL's EVP digest API, which picks the fastest code the CPU allows (SHA
// extensions, AVX2, ...) and is the implementation the wider world checks.
#ifndef PARITAS_INTERNAL_BASE_SHA256_H_
#define PARITAS_INTERNAL_BASE_SHA256_H_

#include <cstddef>
#include <memory>
#include <string>
#include <string_view>

// OpenSSL's context type, declared here so its headers stay out of callers.
struct evp_md_ctx_st;

namespace paritas::internal {

// Incremental SHA-256: Update any number of times, then HexDigest once.
class Sha256 {
 public:
  // Starts an empty message.
  Sha256();
  ~Sha256();
  Sha256(Sha256&&) noexcept;
  Sha256& operator=(Sha256&&) noexcept;

  // Appends `size` bytes at `data` to the message; may be called repeatedly
  // with pieces of any size, including zero.
  void Update(const void* data, size_t size);

  // Finishes the message and returns its digest as 64 lowercase hex
  // characters. The hasher is spent afterwards: call it once.
  std::string HexDigest();

 private:
  struct ContextDeleter {
    void operator()(evp_md_ctx_st* context) const;
  };
  // The OpenSSL digest context holding the running state.
  std::unique_ptr<evp_md_ctx_st, ContextDeleter> context_;
  bool finished_ = false;
};

// Hashes the file at `path` by streaming it in 1 MiB blocks. On failure
// returns false with "<path>: cannot read file: <strerror>" in *error.
bool Sha256File(const std::string& path, std::string* hex_digest, std::string* error);

// Returns the SHA-256 of `data` as 64 lowercase hex characters.
std::string Sha256Hex(std::string_view data);

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_BASE_SHA256_H_
