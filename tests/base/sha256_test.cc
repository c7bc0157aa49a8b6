// SHA-256 is checked three ways: the example digests NIST publishes for
// FIPS 180-4, streaming in pieces against hashing at once, and Python's
// hashlib (a reference library) on generated files.
#include "base/sha256.h"

#include <algorithm>
#include <cstdint>
#include <cstdio>
#include <cstring>
#include <random>
#include <sstream>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include <gtest/gtest.h>

#include "test_util.h"

namespace paritas::internal {
namespace {

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

// Source of the three example digests below: FIPS 180-4 / NIST Cryptographic
// Standards and Guidelines, example values for SHA-256 (SHA256.pdf): the
// one-block message "abc", the two-block 448-bit message, and one million 'a'.
constexpr char kAbcHexDigest[] =
    "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad";
constexpr char kTwoBlockMessage[] = "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq";
constexpr char kTwoBlockHexDigest[] =
    "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1";
constexpr char kMillionAHexDigest[] =
    "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0";

TEST(Sha256, MatchesNistExampleForOneBlockMessageAbc) {
  EXPECT_EQ(Sha256Hex("abc"), kAbcHexDigest);
}

TEST(Sha256, MatchesNistExampleForTwoBlockMessage) {
  // 56 bytes = 448 bits: the length no longer fits after the padding bit, so
  // the padding spills into a second block.
  ASSERT_EQ(std::string_view(kTwoBlockMessage).size(), 56u);
  EXPECT_EQ(Sha256Hex(kTwoBlockMessage), kTwoBlockHexDigest);
}

TEST(Sha256, MatchesNistExampleForOneMillionAWhetherWholeOrInPieces) {
  const std::string message(1000000, 'a');
  EXPECT_EQ(Sha256Hex(message), kMillionAHexDigest);
  // 1000 pieces of 1000 bytes: 1000 is not a multiple of 64, so blocks straddle pieces.
  Sha256 hasher;
  for (int i = 0; i < 1000; ++i) hasher.Update(message.data() + 1000 * i, 1000);
  EXPECT_EQ(hasher.HexDigest(), kMillionAHexDigest);
}

TEST(Sha256, DigestsTheNistExamplesFedOneByteAtATime) {
  for (const std::string& message : {std::string("abc"), std::string(kTwoBlockMessage)}) {
    Sha256 hasher;
    for (char c : message) hasher.Update(&c, 1);
    EXPECT_EQ(hasher.HexDigest(), Sha256Hex(message)) << "message '" << message << "'";
  }
  Sha256 abc;
  abc.Update("ab", 2);
  abc.Update("", 0);  // Empty pieces change nothing.
  abc.Update("c", 1);
  EXPECT_EQ(abc.HexDigest(), kAbcHexDigest);
}

TEST(Sha256, StreamingInPiecesEqualsOneShotForEveryLengthUpTo300Bytes) {
  // 0..300 crosses the 55/56 and 119/120 byte padding boundaries and several
  // whole blocks.
  for (size_t size = 0; size <= 300; ++size) {
    const std::string data = RandomBytes(size, 1000 + size);
    const std::string one_shot = Sha256Hex(data);
    EXPECT_EQ(HashInPieces(data, 70, size), one_shot) << "size " << size;
    EXPECT_EQ(HashInPieces(data, 1, size), one_shot) << "size " << size;
  }
}

TEST(Sha256, StreamingInPiecesEqualsOneShotForMultiMegabyteBuffers) {
  for (size_t size : {size_t{1} << 20, (size_t{3} << 20) + 37, (size_t{5} << 20) - 1}) {
    const std::string data = RandomBytes(size, size);
    const std::string one_shot = Sha256Hex(data);
    EXPECT_EQ(HashInPieces(data, 100000, 8), one_shot) << "size " << size;
    EXPECT_EQ(HashInPieces(data, 63, 9), one_shot) << "size " << size;
  }
}

TEST(Sha256, DifferentMessagesGiveDifferentDigests) {
  // Guards against a hasher that ignores its input.
  EXPECT_NE(Sha256Hex("abc"), Sha256Hex("abd"));
  EXPECT_NE(Sha256Hex(""), Sha256Hex(std::string(1, '\0')));
}

TEST(Sha256, HexDigestIsSixtyFourLowercaseHexCharacters) {
  const std::string hex = Sha256Hex("paritas");
  ASSERT_EQ(hex.size(), 64u);
  EXPECT_EQ(hex.find_first_not_of("0123456789abcdef"), std::string::npos);
}

TEST(Sha256, MovedHasherContinuesTheSameMessage) {
  Sha256 first;
  first.Update("a", 1);
  Sha256 second = std::move(first);
  second.Update("bc", 2);
  EXPECT_EQ(second.HexDigest(), kAbcHexDigest);
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

TEST(Sha256, MatchesPythonHashlibOnEveryPrefixUpTo300Bytes) {
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
  for (size_t size = 0; size <= 300; ++size) {
    EXPECT_EQ(Sha256Hex(std::string_view(data).substr(0, size)), expected[size]) << "size " << size;
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
