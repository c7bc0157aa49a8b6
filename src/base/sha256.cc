// SHA-256 through OpenSSL's EVP interface. OpenSSL dispatches at run time to
// SHA extensions or vector code, so one binary runs on any x86-64 and is fast
// where it can be; our part is streaming and hex formatting.
#include "base/sha256.h"

#include <fcntl.h>
#include <openssl/evp.h>
#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <memory>

namespace paritas::internal {
namespace {

// Large enough that read() calls cost nothing next to hashing, small enough to
// stay in L2 while it is hashed.
constexpr size_t kFileBlockBytes = size_t{1} << 20;

// The EVP calls fail only when memory runs out or OpenSSL is broken; neither
// is something the user can fix, so they end the program.
void CheckOpenSsl(int result, const char* call) {
  if (result == 1) return;
  std::fprintf(stderr, "paritas: internal error: OpenSSL %s failed\n", call);
  std::abort();
}

}  // namespace

void Sha256::ContextDeleter::operator()(evp_md_ctx_st* context) const {
  EVP_MD_CTX_free(context);
}

Sha256::Sha256() : context_(EVP_MD_CTX_new()) {
  CheckOpenSsl(context_ != nullptr, "EVP_MD_CTX_new");
  CheckOpenSsl(EVP_DigestInit_ex(context_.get(), EVP_sha256(), nullptr), "EVP_DigestInit_ex");
}

Sha256::~Sha256() = default;
Sha256::Sha256(Sha256&&) noexcept = default;
Sha256& Sha256::operator=(Sha256&&) noexcept = default;

void Sha256::Update(const void* data, size_t size) {
  if (size == 0) return;
  CheckOpenSsl(EVP_DigestUpdate(context_.get(), data, size), "EVP_DigestUpdate");
}

std::string Sha256::HexDigest() {
  // OpenSSL refuses a second final on the same context; fail loudly instead.
  if (finished_) std::abort();
  finished_ = true;
  unsigned char digest[EVP_MAX_MD_SIZE];
  unsigned int num_digest_bytes = 0;
  CheckOpenSsl(EVP_DigestFinal_ex(context_.get(), digest, &num_digest_bytes),
               "EVP_DigestFinal_ex");
  static constexpr char kHexDigits[] = "0123456789abcdef";
  std::string hex(2 * num_digest_bytes, '0');
  for (unsigned int i = 0; i < num_digest_bytes; ++i) {
    hex[2 * i] = kHexDigits[digest[i] >> 4];
    hex[2 * i + 1] = kHexDigits[digest[i] & 0xF];
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
  const std::unique_ptr<unsigned char[]> block(new unsigned char[kFileBlockBytes]);
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
