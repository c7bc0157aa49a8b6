// Repeated quote rows are found among quotes of equal row hash, taken in
// file order, so the earliest row of each run is the one kept whatever the
// order the file was parsed in. The (hash, position) pairs are first
// distributed by the top bits of the hash (a stable counting pass, in
// parallel over the quotes); each bucket, a few thousand pairs in file
// order, is then settled with a hash table that fits the cache: linear time,
// and the same repeats as scanning all pairs sorted by (hash, position). A
// pair holds the quote and the low half of its hash (8 bytes, the whole
// hash read only when two halves match), all of them at once: 56 MB for 7
// million quotes. Two passes over the hashes, each keeping half of the
// buckets' pairs, held half of that, but the search then took 0.06-0.08 s
// instead of 0.04-0.05 on L and 0.16-0.22 s instead of 0.11 on T, for 11 MB
// less at T's peak (bench/HISTORY.md, "Fifteenth round").
#include <omp.h>

#include <algorithm>
#include <cstdint>
#include <memory>
#include <string>
#include <utility>
#include <vector>

#include "base/huge_pages.h"
#include "paritas/base/text.h"
#include "survey/loader_state.h"

namespace paritas::internal {
namespace {

constexpr uint32_t kNone = UINT32_MAX;

// A quote that repeats an earlier one, its original.
using Repeat = std::pair<uint32_t, uint32_t>;

// Leaves out the quotes `repeats` names first (in quote order), keeping the
// others in order: the runs between them are moved down.
void CompactQuotes(const std::vector<Repeat>& repeats, QuoteArrays* quotes) {
  const size_t n = quotes->size();
  const auto compact = [&repeats, n](auto& array) {
    if (array.empty()) return;
    size_t out = repeats.front().first;
    for (size_t k = 0; k < repeats.size(); ++k) {
      const size_t from = repeats[k].first + 1;
      const size_t to = k + 1 < repeats.size() ? repeats[k + 1].first : n;
      std::copy(array.begin() + from, array.begin() + to, array.begin() + out);
      out += to - from;
    }
    array.resize(out);
  };
  compact(quotes->region);
  compact(quotes->item);
  compact(quotes->log_price);
  compact(quotes->representative);
  compact(quotes->weight);
}

// A quote and the low 32 bits of its row hash (its bucket stands for the
// top bits); no initialiser, so an array of them is not zero-filled (its
// pages are first touched by the threads that fill it). Quotes whose keys
// are equal are told apart by their whole hashes, read only then.
struct HashedQuote {
  uint32_t key;    // low 32 bits of the row hash
  uint32_t quote;  // quote index
};

// A slot of MarkRepeats' table: a hash's latest quote and that quote's
// original (itself when it repeats none).
struct LatestQuote {
  uint32_t key;
  uint32_t quote;
  uint32_t original;
};

// Adds to *repeats each quote of a bucket (`order`, in quote order) that
// repeats an earlier one: among the quotes of equal hash, in quote order, a
// quote repeats the original of the one before it (that quote's own
// original when it is a repeat, else that quote) when region, item and ln
// price are equal too. This is the scan of all pairs sorted by (hash,
// index), found through a small hash table of each hash's latest quote
// instead of a sort. `table` is scratch.
void MarkRepeats(const QuoteArrays& quotes, const HashedQuote* order, size_t n,
                 std::vector<LatestQuote>* table, std::vector<Repeat>* repeats) {
  size_t slots = 16;
  while (slots < 2 * n) slots *= 2;
  table->assign(slots, {0, kNone, kNone});
  const size_t mask = slots - 1;
  const UninitialisedVector<uint64_t>& hash = quotes.row_hash;
  for (size_t k = 0; k < n; ++k) {
    const auto [key, q] = order[k];
    size_t slot = key & mask;
    for (;; slot = (slot + 1) & mask) {
      const LatestQuote& entry = (*table)[slot];
      if (entry.quote == kNone || (entry.key == key && hash[entry.quote] == hash[q])) break;
    }
    LatestQuote& latest = (*table)[slot];
    uint32_t original = q;
    if (latest.quote != kNone) {
      const uint32_t first = latest.original;
      if (quotes.region[q] == quotes.region[first] && quotes.item[q] == quotes.item[first] &&
          quotes.log_price[q] == quotes.log_price[first]) {
        repeats->emplace_back(q, first);
        original = first;
      }
    }
    latest = {key, q, original};
  }
}

// Returns the quotes that repeat an earlier one with their originals, in
// quote order.
std::vector<Repeat> FindRepeats(const QuoteArrays& quotes, int num_threads) {
  const size_t n = quotes.size();
  const UninitialisedVector<uint64_t>& hash = quotes.row_hash;
  // Buckets of about 2,000 pairs (32 KB), at most 2^16 of them.
  int bits = 0;
  while (bits < 16 && (n >> bits) > 2048) ++bits;
  const size_t num_buckets = size_t{1} << bits;
  const auto bucket_of = [bits](uint64_t h) { return bits == 0 ? 0 : h >> (64 - bits); };
  num_threads = std::max(1, std::min(num_threads, static_cast<int>(n / 65536) + 1));
  // counts[t][b]: pairs of thread t's quotes in bucket b, then where they go.
  std::vector<std::vector<size_t>> counts(num_threads, std::vector<size_t>(num_buckets, 0));
  std::unique_ptr<HashedQuote[]> order = std::make_unique_for_overwrite<HashedQuote[]>(n);
  AdviseHugePages(order.get(), n * sizeof(HashedQuote));
  std::vector<std::vector<Repeat>> found(num_threads);
  std::vector<size_t> bucket_begin(num_buckets + 1, 0);
#pragma omp parallel num_threads(num_threads)
  {
    const int t = omp_get_thread_num();
    // Contiguous ranges of quotes in thread order keep each bucket in
    // quote order (a stable distribution).
    const size_t from = n * t / num_threads, to = n * (t + 1) / num_threads;
    std::vector<size_t>& mine = counts[t];
    for (size_t q = from; q < to; ++q) ++mine[bucket_of(hash[q])];
#pragma omp barrier
#pragma omp single
    {
      size_t at = 0;
      for (size_t b = 0; b < num_buckets; ++b) {
        bucket_begin[b] = at;
        for (int u = 0; u < num_threads; ++u) {
          const size_t count = counts[u][b];
          counts[u][b] = at;
          at += count;
        }
      }
      bucket_begin[num_buckets] = at;
    }
    for (size_t q = from; q < to; ++q) {
      order[mine[bucket_of(hash[q])]++] = {static_cast<uint32_t>(hash[q]), static_cast<uint32_t>(q)};
    }
#pragma omp barrier
    // Equal hashes share a bucket, so each bucket is settled alone.
    std::vector<LatestQuote> table;
#pragma omp for schedule(dynamic, 64)
    for (size_t b = 0; b < num_buckets; ++b) {
      MarkRepeats(quotes, order.get() + bucket_begin[b], bucket_begin[b + 1] - bucket_begin[b], &table,
                  &found[t]);
    }
  }
  std::vector<Repeat> repeats;
  for (std::vector<Repeat>& part : found) repeats.insert(repeats.end(), part.begin(), part.end());
  std::sort(repeats.begin(), repeats.end());
  return repeats;
}

}  // namespace

void HandleDuplicateQuotes(DuplicateQuotePolicy policy, int num_threads, LoadState* state,
                           Rejections* rejections, const std::vector<InputFileSummary*>& files,
                           LoadSummary* summary) {
  QuoteArrays& quotes = state->quotes;
  const std::vector<size_t>& begin = state->quote_file_begin;
  // The price file of quote q (quotes are in the order read).
  auto file_of = [&begin](size_t q) {
    return static_cast<size_t>(std::upper_bound(begin.begin(), begin.end(), q) - begin.begin()) -
           1;
  };
  summary->duplicate_policy = policy;
  const std::vector<Repeat> repeats = FindRepeats(quotes, num_threads);
  for (const auto& [q, repeated_quote] : repeats) {
    const int64_t line = state->quote_lines.Of(q);
    const int64_t original = state->quote_lines.Of(repeated_quote);
    const size_t k = file_of(q), first = file_of(repeated_quote);
    InputFileSummary* file = files[k];
    const std::string& path = file->path;
    // "line 12" in the same file, "prices.csv:12" in an earlier one.
    const std::string repeated = (k == first ? "line " : files[first]->path + ":") +
                                 std::to_string(original);
    if (summary->num_duplicate_quotes == 0) {
      summary->duplicate_example = path + ":" + std::to_string(line) + " repeats " + repeated;
    }
    ++summary->num_duplicate_quotes;
    if (policy == DuplicateQuotePolicy::kKeep) continue;
    --file->rows_used;
    --state->num_quotes;
    if (policy == DuplicateQuotePolicy::kDrop) {
      ++file->rows_rejected;
    } else {
      rejections->Add({path, line,
                       LocatedMessage(path, line, 0,
                                      "the row repeats " + repeated +
                                          " field for field (duplicate_quotes: reject)"),
                       ""},
                      file);
    }
  }
  if (policy != DuplicateQuotePolicy::kKeep && summary->num_duplicate_quotes > 0) {
    CompactQuotes(repeats, &quotes);
  }
  // Released, not just emptied: `vector = {}` would assign an empty list
  // and keep the 16 bytes per quote allocated (and resident) until the
  // cells are built.
  UninitialisedVector<uint64_t>().swap(quotes.row_hash);
  state->quote_lines = QuoteLines();
}

}  // namespace paritas::internal
