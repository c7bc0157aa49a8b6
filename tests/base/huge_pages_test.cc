// MapForWriting: pages mapped ahead keep their contents and take no page
// fault when written (counted by getrusage's minor faults, Linux only;
// not under a sanitizer, whose shadow memory faults too).
#include "base/huge_pages.h"

#include <gtest/gtest.h>

#include <cstdint>
#include <cstring>
#include <vector>

#include "sanitizers.h"

#if defined(__linux__)
#include <sys/mman.h>
#include <sys/resource.h>
#endif

namespace paritas::internal {
namespace {

#if defined(__linux__)
constexpr size_t kPage = 4096;
constexpr size_t kBytes = size_t{32} << 20;  // 8,192 pages

long MinorFaults() {
  rusage usage{};
  getrusage(RUSAGE_SELF, &usage);
  return usage.ru_minflt;
}

// A fresh anonymous mapping, unmapped at the end of the test.
class FreshMapping : public ::testing::Test {
 protected:
  void SetUp() override {
    void* mapped = mmap(nullptr, kBytes, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS, -1, 0);
    ASSERT_NE(mapped, MAP_FAILED);
    data_ = static_cast<char*>(mapped);
    madvise(data_, kBytes, MADV_NOHUGEPAGE);  // one fault per 4 KiB when written
  }
  void TearDown() override {
    if (data_ != nullptr) munmap(data_, kBytes);
  }
  char* data_ = nullptr;
};

TEST_F(FreshMapping, PagesMappedAheadTakeNoFaultWhenWritten) {
#if defined(PARITAS_TEST_ADDRESS_SANITIZER) || defined(PARITAS_TEST_THREAD_SANITIZER)
  GTEST_SKIP() << "a sanitizer's shadow memory faults as the pages are written";
#endif
  // The range starts and ends inside a page: those two are left to fault.
  if (!MapForWriting(data_ + 100, kBytes - 200)) GTEST_SKIP() << "MADV_POPULATE_WRITE is not available here (kernel or headers)";
  const long before = MinorFaults();
  for (size_t at = 0; at < kBytes; at += kPage) data_[at] = 1;
  // Without the call: 8,192 faults (one per page written).
  EXPECT_LE(MinorFaults() - before, 16);
}

TEST_F(FreshMapping, PagesMappedAheadKeepWhatWasWritten) {
  std::vector<char> pattern(kBytes);
  for (size_t k = 0; k < kBytes; ++k) pattern[k] = static_cast<char>(k * 7 + k / 4099);
  std::memcpy(data_, pattern.data(), kBytes / 2);  // half written first
  if (!MapForWriting(data_, kBytes)) GTEST_SKIP() << "MADV_POPULATE_WRITE is not available here (kernel or headers)";
  EXPECT_EQ(std::memcmp(data_, pattern.data(), kBytes / 2), 0);
  const std::vector<char> zeros(kBytes / 2, 0);
  EXPECT_EQ(std::memcmp(data_ + kBytes / 2, zeros.data(), kBytes / 2), 0);  // fresh pages read 0
}
#endif

TEST(MapForWriting, LeavesSmallAndNullRangesAlone) {
  std::vector<char> small(16 * 4096 - 1, 3);
  EXPECT_FALSE(MapForWriting(small.data(), small.size()));
  EXPECT_FALSE(MapForWriting(nullptr, size_t{1} << 30));
  EXPECT_EQ(small.back(), 3);
}

}  // namespace
}  // namespace paritas::internal
