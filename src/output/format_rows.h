// Large tables formatted in parallel row blocks and handed over in order, so
// the text is the same for any number of threads, and a block can be written
// while the next ones are formatted.
#ifndef PARITAS_INTERNAL_OUTPUT_FORMAT_ROWS_H_
#define PARITAS_INTERNAL_OUTPUT_FORMAT_ROWS_H_

#include <omp.h>

#include <algorithm>
#include <condition_variable>
#include <cstdint>
#include <mutex>
#include <string>
#include <utility>
#include <vector>

#include "paritas/output/run_folder.h"

namespace paritas::internal {

// Blocks FormatRowBlocks formats ahead of the first one not yet emitted,
// per thread: the text held while `emit` waits (for a file writer's full
// queue) is at most this many blocks a thread (a few MB on two threads; it
// grows with the threads), not the rest of the file.
constexpr int64_t kBlocksAheadPerThread = 4;

// Emits `header`, then rows [0, num_rows) formatted by `format_row(row, out)`
// in blocks of `rows_per_block` rows, in row order. Blocks are formatted in
// parallel; a thread that finishes a block leaves it and, unless another
// thread is emitting, emits every block now ready in order. No thread waits
// for another's block (an OpenMP `ordered` loop did, and its spinning
// threads took the core the file writer needed), except that a thread does
// not start a block kBlocksAheadPerThread x threads or more beyond the first
// not yet emitted: it sleeps until the emitting thread gets there (the
// lowest block's thread never waits, so the blocks always advance). Each
// block reserves `bytes_per_row_hint` bytes a row up front so that it rarely
// grows (a hint only: the text is the same).
template <typename FormatRow>
void FormatRowBlocks(int64_t num_rows, int64_t rows_per_block, size_t bytes_per_row_hint,
                     const FormatRow& format_row, std::string header, const TextBlocks& emit) {
  emit(std::move(header));
  const int64_t num_blocks = (num_rows + rows_per_block - 1) / rows_per_block;
  std::vector<std::string> ready(static_cast<size_t>(num_blocks));
  std::vector<char> is_ready(static_cast<size_t>(num_blocks), 0);
  int64_t next = 0;                  // the first block not yet emitted
  bool emitting = false;             // a thread is emitting blocks
  std::mutex mutex;                  // guards the three above
  std::condition_variable advanced;  // `next` moved on
#pragma omp parallel if (num_blocks > 4)
  {
    const int64_t max_ahead = kBlocksAheadPerThread * omp_get_num_threads();
#pragma omp for schedule(dynamic, 1)
    for (int64_t b = 0; b < num_blocks; ++b) {
      if (b >= max_ahead) {
        std::unique_lock<std::mutex> lock(mutex);
        advanced.wait(lock, [&] { return b < next + max_ahead; });
      }
      std::string text;
      const int64_t end = std::min(num_rows, (b + 1) * rows_per_block);
      text.reserve(static_cast<size_t>(end - b * rows_per_block) * bytes_per_row_hint);
      for (int64_t row = b * rows_per_block; row < end; ++row) format_row(row, &text);
      std::unique_lock<std::mutex> lock(mutex);
      ready[b] = std::move(text);
      is_ready[b] = 1;
      if (emitting) continue;  // that thread will find this block
      emitting = true;
      while (next < num_blocks && is_ready[next]) {
        std::string block = std::move(ready[next++]);
        lock.unlock();
        advanced.notify_all();
        emit(std::move(block));
        lock.lock();
      }
      emitting = false;
    }
  }
}

// The blocks' text in order, in one allocation.
inline std::string JoinBlocks(std::vector<std::string>& blocks) {
  if (blocks.empty()) return "";
  size_t total = 0;
  for (const std::string& block : blocks) total += block.size();
  std::string out = std::move(blocks.front());
  out.reserve(total);
  for (size_t k = 1; k < blocks.size(); ++k) out += blocks[k];
  return out;
}

// Collects a file's blocks into one text (for the string form of a table).
class JoinedText {
 public:
  TextBlocks Sink() {
    return [this](std::string block) { blocks_.push_back(std::move(block)); };
  }
  std::string Take() { return JoinBlocks(blocks_); }

 private:
  std::vector<std::string> blocks_;
};

// The blocks of FormatRowBlocks joined into one text.
template <typename FormatRow>
std::string FormatRows(int64_t num_rows, int64_t rows_per_block, size_t bytes_per_row_hint,
                       const FormatRow& format_row, std::string header) {
  JoinedText joined;
  FormatRowBlocks(num_rows, rows_per_block, bytes_per_row_hint, format_row, std::move(header),
                  joined.Sink());
  return joined.Take();
}

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_OUTPUT_FORMAT_ROWS_H_
