// SHA-256 is checked three ways: published example digests, agreement of the
// portable and SHA-extension paths on random input cut at random places, and
// Python's hashlib (a reference library) on generated files.
#include "base/sha256.h"

#include <algorithm>
#include <cstdint>
#include <cstdio>
#include <cstring>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "test_util.h"

namespace paritas::internal {
namespace {

// Restores automatic path selection when a test ends, even on failure.
class ScopedForcePortable {
 public:
  explicit ScopedForcePortable(bool force) { Sha256ForcePortable(force); }
  ~ScopedForcePortable() { Sha256ForcePortable(false); }
};

std::string RandomBytes(size_t size, uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::string bytes(size, '\0');
  // Eight bytes per draw: the multi-megabyte tests would otherwise spend most
  // of their time here.
  for (size_t i = 0; i < size; i += 8) {
    const uint64_t draw = rng();
    std::memcpy(bytes.data() + i, &draw, std::min<size_t>(8, size - i));
  }
  return bytes;
}

// Hashes `data` through Update in pieces of random sizes (0..max_piece bytes)
// so the partial-block buffering is exercised at every offset.
std::string HashInPieces(const std::string& data, size_t max_piece, uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::uniform_int_distribution<size_t> piece_size(0, max_piece);
  Sha256 hasher;
  size_t offset = 0;
  while (offset < data.size()) {
    const size_t size = std::min(piece_size(rng), data.size() - offset);
    hasher.Update(data.data() + offset, size);
    offset += size;
  }
  return hasher.HexDigest();
}

// Runs a command and returns its standard output.
std::string RunCommand(const std::string& command) {
  std::string output;
  FILE* pipe = popen(command.c_str(), "r");
  if (pipe == nullptr) return output;
  char chunk[4096];
  size_t num_read;
  while ((num_read = fread(chunk, 1, sizeof(chunk), pipe)) > 0) output.append(chunk, num_read);
  pclose(pipe);
  return output;
}

struct PublishedVector {
  std::string message;
  std::string hex_digest;
};

// FIPS 180-2 Appendix B.1 ("abc") and B.2 (the 448-bit two-block message);
// the same examples appear in NIST's FIPS 180-4 example document. The empty
// message digest is the widely published SHA-256("") (NIST SHAVS short-message
// vector Len = 0). Digests written from memory, verified with
// /usr/bin/python3 hashlib.
std::vector<PublishedVector> PublishedVectors() {
  return {
      {"abc", "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"},
      {"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq",
       "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"},
      {"", "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"},
  };
}

// FIPS 180-2 Appendix B.3: one million repetitions of 'a'. From memory,
// verified with /usr/bin/python3 hashlib.
constexpr char kMillionAHexDigest[] =
    "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0";

class Sha256PathTest : public ::testing::TestWithParam<bool> {
 protected:
  void SetUp() override {
    if (!GetParam() && !Sha256CpuHasShaExtensions()) {
      GTEST_SKIP() << "CPU lacks the SHA extensions";
    }
  }
  ScopedForcePortable force_portable_{GetParam()};
};

TEST_P(Sha256PathTest, UsesTheRequestedPath) {
  EXPECT_EQ(Sha256().uses_sha_extensions(), !GetParam());
}

TEST_P(Sha256PathTest, MatchesPublishedExampleDigests) {
  for (const PublishedVector& vector : PublishedVectors()) {
    EXPECT_EQ(Sha256Hex(vector.message), vector.hex_digest) << "message '" << vector.message << "'";
  }
}

TEST_P(Sha256PathTest, MatchesPublishedMillionADigestWhetherWholeOrInPieces) {
  const std::string message(1000000, 'a');
  EXPECT_EQ(Sha256Hex(message), kMillionAHexDigest);
  // 1000 pieces of 1000 bytes: 1000 is not a multiple of 64, so blocks straddle pieces.
  Sha256 hasher;
  for (int i = 0; i < 1000; ++i) hasher.Update(message.data() + 1000 * i, 1000);
  EXPECT_EQ(hasher.HexDigest(), kMillionAHexDigest);
}

INSTANTIATE_TEST_SUITE_P(Paths, Sha256PathTest, ::testing::Values(false, true),
                         [](const ::testing::TestParamInfo<bool>& param_info) {
                           return param_info.param ? "Portable" : "ShaExtensions";
                         });

TEST(Sha256, PathsAgreeOnRandomBuffersOfEveryLengthUpTo300Bytes) {
  if (!Sha256CpuHasShaExtensions()) GTEST_SKIP() << "CPU lacks the SHA extensions";
  // 0..300 crosses the 55/56 and 119/120 byte padding boundaries and several
  // whole blocks.
  for (size_t size = 0; size <= 300; ++size) {
    const std::string data = RandomBytes(size, 1000 + size);
    std::string portable;
    {
      ScopedForcePortable force(true);
      portable = HashInPieces(data, 70, size);
    }
    EXPECT_EQ(HashInPieces(data, 70, size + 1), portable) << "size " << size;
    EXPECT_EQ(Sha256Hex(data), portable) << "size " << size;
  }
}

TEST(Sha256, PathsAgreeOnMultiMegabyteBuffersFedInRandomPieces) {
  if (!Sha256CpuHasShaExtensions()) GTEST_SKIP() << "CPU lacks the SHA extensions";
  for (size_t size : {size_t{1} << 20, (size_t{3} << 20) + 37, (size_t{5} << 20) - 1}) {
    const std::string data = RandomBytes(size, size);
    std::string portable;
    {
      ScopedForcePortable force(true);
      portable = HashInPieces(data, 100000, 7);
    }
    EXPECT_EQ(HashInPieces(data, 100000, 8), portable) << "size " << size;
    EXPECT_EQ(HashInPieces(data, 63, 9), portable) << "size " << size;
    EXPECT_EQ(Sha256Hex(data), portable) << "size " << size;
  }
}

TEST(Sha256, HexDigestIsSixtyFourLowercaseHexCharacters) {
  const std::string hex = Sha256Hex("paritas");
  ASSERT_EQ(hex.size(), 64u);
  EXPECT_EQ(hex.find_first_not_of("0123456789abcdef"), std::string::npos);
}

TEST(Sha256File, MatchesPythonHashlibOnAFileLargerThanOneReadBlock) {
  const std::string dir = testing::MakeTempDir("sha256_file");
  const std::string path = dir + "/random.bin";
  // 2.5 MiB + 13 bytes: several 1 MiB reads and a ragged final block.
  testing::WriteTextFile(path, RandomBytes((size_t{5} << 19) + 13, 42));
  std::string digest, error;
  ASSERT_TRUE(Sha256File(path, &digest, &error)) << error;
  // Reference: Python's hashlib (standard library of Debian's python3).
  const std::string expected = RunCommand(
      std::string(PARITAS_PYTHON) +
      " -c \"import hashlib,sys; print(hashlib.sha256(open(sys.argv[1],'rb').read()).hexdigest())\" " +
      path);
  EXPECT_EQ(digest + "\n", expected);
}

TEST(Sha256, BothPathsMatchPythonHashlibOnEveryPrefixUpTo300Bytes) {
  const std::string dir = testing::MakeTempDir("sha256_prefixes");
  const std::string path = dir + "/random.bin";
  const std::string data = RandomBytes(300, 2024);
  testing::WriteTextFile(path, data);
  // Reference: Python's hashlib, one digest per line for data[:0] .. data[:300].
  const std::string reference = RunCommand(
      std::string(PARITAS_PYTHON) +
      " -c \"import hashlib,sys; d=open(sys.argv[1],'rb').read(); "
      "print('\\n'.join(hashlib.sha256(d[:n]).hexdigest() for n in range(301)))\" " +
      path);
  std::istringstream lines(reference);
  std::vector<std::string> expected;
  for (std::string line; std::getline(lines, line);) expected.push_back(line);
  ASSERT_EQ(expected.size(), 301u);
  for (bool portable : {false, true}) {
    ScopedForcePortable force(portable);
    for (size_t size = 0; size <= 300; ++size) {
      EXPECT_EQ(Sha256Hex(std::string_view(data).substr(0, size)), expected[size])
          << "size " << size << (portable ? " portable" : " default");
    }
  }
}

TEST(Sha256File, ReportsAMissingFileWithPathAndReason) {
  const std::string path = testing::MakeTempDir("sha256_missing") + "/absent.csv";
  std::string digest = "unchanged", error;
  EXPECT_FALSE(Sha256File(path, &digest, &error));
  EXPECT_EQ(error, path + ": cannot read file: No such file or directory");
  EXPECT_EQ(digest, "unchanged");
}

TEST(Sha256File, ReportsADirectoryAsUnreadable) {
  const std::string path = testing::MakeTempDir("sha256_directory");
  std::string digest, error;
  EXPECT_FALSE(Sha256File(path, &digest, &error));
  EXPECT_EQ(error, path + ": cannot read file: Is a directory");
}

}  // namespace
}  // namespace paritas::internal
