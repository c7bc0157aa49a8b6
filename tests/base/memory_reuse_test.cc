// KeepFreedMemoryForReuse: a large block comes from malloc's heap and, once
// freed, stays there for the next one (glibc only: mallinfo2 counts the
// blocks with mappings of their own and the heap's free bytes).
#include "base/memory_reuse.h"

#include <gtest/gtest.h>

#include <cstdlib>
#include <cstring>
#include <thread>

#include "sanitizers.h"

namespace paritas::internal {
namespace {

// AddressSanitizer brings its own malloc, which has no such settings.
#if defined(__GLIBC__) && !defined(PARITAS_TEST_ADDRESS_SANITIZER)
constexpr size_t kLarge = size_t{64} << 20;

// Allocates and writes a large block; returns it.
char* TouchedBlock(size_t size = kLarge) {
  char* block = static_cast<char*>(std::malloc(size));
  std::memset(block, 1, size);
  return block;
}

TEST(KeepFreedMemoryForReuse, ServesLargeBlocksFromTheHeapAndKeepsThemWhenFreed) {
  ASSERT_TRUE(KeepFreedMemoryForReuse());
  const size_t mapped_before = mallinfo2().hblks;
  char* block = TouchedBlock();
  // No mapping of its own: malloc's default would have given it one.
  EXPECT_EQ(mallinfo2().hblks, mapped_before);
  std::free(block);
  // Its bytes stay in the heap, free for the next large block.
  EXPECT_GE(mallinfo2().fordblks, kLarge);
  const size_t heap_before = mallinfo2().arena;
  block = TouchedBlock();
  EXPECT_EQ(mallinfo2().arena, heap_before);  // served from the kept bytes
  std::free(block);
  // Another thread's block (8 MiB: one that fits an arena of its own) comes
  // from the same kept bytes, not from an arena of that thread's own.
  std::thread([] { std::free(TouchedBlock(kLarge / 8)); }).join();
  EXPECT_EQ(mallinfo2().arena, heap_before);
}
#endif

}  // namespace
}  // namespace paritas::internal
