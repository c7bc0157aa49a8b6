// Cells are built by counting sort of the quotes on dense indices: linear in
// the number of quotes, and a stable order that is the same on every run.
#include "survey/cell_prices.h"

#include <sys/mman.h>

#include <algorithm>
#include <bit>
#include <cmath>
#include <memory>
#include <numeric>

#include "paritas/elementary/cpd.h"

namespace paritas::internal {
namespace {

// Appends one cell to the arrays.
void AppendCell(int32_t region, int32_t item, const CellMoments& moments, bool weighted,
                CellPrices* cells) {
  cells->region.push_back(region);
  cells->item.push_back(item);
  cells->log_price.push_back(moments.mean);
  cells->log_sd.push_back(moments.LogSd(weighted));
  cells->log_min.push_back(moments.min);
  cells->log_max.push_back(moments.max);
  cells->num_quotes.push_back(moments.num_quotes);
  cells->representative.push_back(moments.representative);
  if (weighted) cells->weight.push_back(moments.sum_weight);
}

void ReserveCells(size_t n, CellPrices* cells) {
  cells->region.reserve(n);
  cells->item.reserve(n);
  cells->log_price.reserve(n);
  cells->log_sd.reserve(n);
  cells->log_min.reserve(n);
  cells->log_max.reserve(n);
  cells->num_quotes.reserve(n);
  cells->representative.reserve(n);
}

// Adds quote q's values to `moments`.
void AddQuote(const QuoteArrays& quotes, size_t q, CellMoments* moments) {
  const bool flag = !quotes.representative.empty() && quotes.representative[q] != 0;
  if (quotes.weight.empty()) {
    moments->Add(quotes.log_price[q], flag);
  } else {
    moments->AddWeighted(quotes.log_price[q], flag, quotes.weight[q]);
  }
}

// Asks the kernel to back [data, data + bytes) with huge pages where it
// spans whole ones (fewer first-touch faults and TLB misses on the large
// arrays written here in scattered order); a hint, without effect on results.
void AdviseHugePages(const void* data, size_t bytes) {
  constexpr uintptr_t kHuge = uintptr_t{2} << 20;
  const uintptr_t begin = (reinterpret_cast<uintptr_t>(data) + kHuge - 1) & ~(kHuge - 1);
  const uintptr_t end = (reinterpret_cast<uintptr_t>(data) + bytes) & ~(kHuge - 1);
  if (end > begin) madvise(reinterpret_cast<void*>(begin), end - begin, MADV_HUGEPAGE);
}

// Allocates n elements without initialising them, advised as huge pages.
template <typename T>
std::unique_ptr<T[]> UninitialisedArray(int64_t n) {
  std::unique_ptr<T[]> array(new T[n]);
  AdviseHugePages(array.get(), n * sizeof(T));
  return array;
}

// Reserves n elements of `v`, advised as huge pages.
template <typename T>
void ReserveAdvised(int64_t n, std::vector<T>* v) {
  v->reserve(n);
  AdviseHugePages(v->data(), n * sizeof(T));
}

// Sizes the cell arrays to n value-initialised cells. Value-initialising
// writes every byte once (and, on fresh memory, faults every page in): done
// by up to two threads, each a half of the bytes. The arrays are reserved
// first, by this thread, so the memory comes from the allocator's arena
// that holds what earlier stages freed; resizing within the capacity
// allocates nothing.
void SizeCells(int64_t n, bool weighted, int num_threads, CellPrices* cells) {
  ReserveAdvised(n, &cells->region);
  ReserveAdvised(n, &cells->item);
  ReserveAdvised(n, &cells->log_price);
  ReserveAdvised(n, &cells->log_sd);
  ReserveAdvised(n, &cells->log_min);
  ReserveAdvised(n, &cells->log_max);
  ReserveAdvised(n, &cells->num_quotes);
  ReserveAdvised(n, &cells->representative);
  if (weighted) ReserveAdvised(n, &cells->weight);
  // 21 (29 weighted) and 24 bytes per cell.
#pragma omp parallel sections num_threads(std::min(num_threads, 2))
  {
#pragma omp section
    {
      cells->log_price.resize(n);
      cells->log_sd.resize(n);
      cells->region.resize(n);
      cells->representative.resize(n);
      if (weighted) cells->weight.resize(n);
    }
#pragma omp section
    {
      cells->log_min.resize(n);
      cells->log_max.resize(n);
      cells->item.resize(n);
      cells->num_quotes.resize(n);
    }
  }
}

// Calls fn(k) for each set bit k of `bits` in [begin, end), in order.
template <typename Fn>
void ForEachSetBit(const uint64_t* bits, int64_t begin, int64_t end, Fn fn) {
  if (begin >= end) return;
  const int64_t last_word = (end - 1) >> 6;
  for (int64_t w = begin >> 6; w <= last_word; ++w) {
    uint64_t word = bits[w];
    if (w == begin >> 6) word &= ~uint64_t{0} << (begin & 63);
    if (w == last_word && (end & 63) != 0) word &= ~(~uint64_t{0} << (end & 63));
    while (word != 0) {
      fn((w << 6) + std::countr_zero(word));
      word &= word - 1;
    }
  }
}

// Set bits of `bits` before bit k, given word_rank[w] = set bits before word w.
int64_t BitsBefore(const uint64_t* bits, const std::vector<int64_t>& word_rank, int64_t k) {
  const uint64_t below = (k & 63) == 0 ? 0 : bits[k >> 6] & ~(~uint64_t{0} << (k & 63));
  return word_rank[k >> 6] + std::popcount(below);
}

// The quotes of each item, in file order: region, ln price, flag, weight.
// Regions are held in 16 bits where the survey has at most 65,536 of them
// (2 bytes a quote less at the cells stage's peak, where the buckets and the
// cell arrays are held at once: 42 MB on 21 million quotes).
template <typename RegionIndex>
struct ItemBuckets {
  std::vector<int64_t> start;  // item i holds [start[i], start[i + 1])
  std::unique_ptr<RegionIndex[]> region;
  std::unique_ptr<double[]> value;
  std::unique_ptr<uint8_t[]> flag;     // null without flags
  std::unique_ptr<double[]> weight;    // null without weights
};

// Scratch of one thread for the cells of one item at a time: per region a
// count, then where its next quote goes (all 0 between items).
struct ItemScratch {
  std::vector<int64_t> slot;
  std::vector<int64_t> first;  // the item's cells' first quote (+ end)
  std::vector<int32_t> region;
  std::vector<double> value, weight;
  std::vector<uint8_t> flag;
};

// Writes the cells of item `i` from its bucket to cells [c, ...): a stable
// counting sort by region within the item (its quotes stay in file order),
// then each cell's moments.
template <typename RegionIndex>
void WriteItemCells(const ItemBuckets<RegionIndex>& buckets, const uint64_t* bits, int num_regions,
                    int32_t i, int64_t c, ItemScratch* scratch, CellPrices* cells) {
  const int64_t begin = buckets.start[i], end = buckets.start[i + 1];
  if (begin == end) return;
  const bool flagged = buckets.flag != nullptr, weighted = buckets.weight != nullptr;
  int64_t* slot = scratch->slot.data();
  for (int64_t a = begin; a < end; ++a) ++slot[buckets.region[a]];
  scratch->region.clear();
  scratch->first.clear();
  int64_t running = 0;
  const int64_t key0 = static_cast<int64_t>(i) * num_regions;
  ForEachSetBit(bits, key0, key0 + num_regions, [&](int64_t key) {
    const int32_t r = static_cast<int32_t>(key - key0);
    scratch->region.push_back(r);
    scratch->first.push_back(running);
    running += slot[r];
    slot[r] = scratch->first.back();
  });
  scratch->first.push_back(running);
  const size_t n = static_cast<size_t>(end - begin);
  if (scratch->value.size() < n) {
    scratch->value.resize(n);
    if (flagged) scratch->flag.resize(n);
    if (weighted) scratch->weight.resize(n);
  }
  for (int64_t a = begin; a < end; ++a) {
    const int64_t at = slot[buckets.region[a]]++;
    scratch->value[at] = buckets.value[a];
    if (flagged) scratch->flag[at] = buckets.flag[a];
    if (weighted) scratch->weight[at] = buckets.weight[a];
  }
  for (size_t j = 0; j < scratch->region.size(); ++j, ++c) {
    CellMoments moments;
    for (int64_t at = scratch->first[j]; at < scratch->first[j + 1]; ++at) {
      if (weighted) {
        moments.AddWeighted(scratch->value[at], flagged && scratch->flag[at] != 0,
                            scratch->weight[at]);
      } else {
        moments.Add(scratch->value[at], flagged && scratch->flag[at] != 0);
      }
    }
    const int32_t r = scratch->region[j];
    slot[r] = 0;
    cells->region[c] = r;
    cells->item[c] = i;
    cells->log_price[c] = moments.mean;
    cells->log_sd[c] = moments.LogSd(weighted);
    if (weighted) cells->weight[c] = moments.sum_weight;
    cells->log_min[c] = moments.min;
    cells->log_max[c] = moments.max;
    cells->num_quotes[c] = moments.num_quotes;
    cells->representative[c] = moments.representative;
  }
}

// Cells by the dense key item x R + region, in two cache-friendly steps
// instead of one counting sort over all keys: the quotes are first put
// into one bucket per item (each thread counts and scatters its own
// contiguous range of quotes, so within an item thread t's quotes follow
// those of the threads before it: file order whatever the thread count),
// and each item's few quotes are then sorted by region in a small scratch.
// A bit per key, set while counting, says which cells exist, so every
// item knows where its cells go before any is written.
template <typename RegionIndex>
void CellsByDenseKey(QuoteArrays* quote_arrays, int num_regions, int num_items, int num_threads,
                     CellPrices* cells) {
  const QuoteArrays& quotes = *quote_arrays;
  const int64_t n = static_cast<int64_t>(quotes.size());
  const int64_t num_keys = static_cast<int64_t>(num_regions) * num_items;
  const int64_t num_words = (num_keys + 63) / 64;
  const int32_t* quote_region = quotes.region.data();
  const int32_t* quote_item = quotes.item.data();
  // Splitting the counts costs more than it saves on a small survey.
  const int threads = n < (int64_t{1} << 20) ? 1 : std::max(1, num_threads);
  std::vector<int64_t> quote_begin(threads + 1);
  for (int t = 0; t <= threads; ++t) quote_begin[t] = n * t / threads;
  // count[t][i]: quotes of item i in thread t's range, then where the next
  // of them goes; bits[t]: the keys seen in that range.
  std::vector<std::vector<int64_t>> count(threads);
  std::vector<std::vector<uint64_t>> bits(threads);
#pragma omp parallel for schedule(static, 1) num_threads(threads)
  for (int t = 0; t < threads; ++t) {
    count[t].assign(num_items, 0);
    bits[t].assign(num_words, 0);
    int64_t* item_count = count[t].data();
    uint64_t* seen = bits[t].data();
    for (int64_t q = quote_begin[t]; q < quote_begin[t + 1]; ++q) {
      const int32_t item = quote_item[q];
      const int64_t key = static_cast<int64_t>(item) * num_regions + quote_region[q];
      ++item_count[item];
      seen[key >> 6] |= uint64_t{1} << (key & 63);
    }
  }
  ItemBuckets<RegionIndex> buckets;
  buckets.start.assign(num_items + 1, 0);
  int64_t running = 0;
  for (int32_t i = 0; i < num_items; ++i) {
    buckets.start[i] = running;
    for (int t = 0; t < threads; ++t) {
      const int64_t quotes_here = count[t][i];
      count[t][i] = running;
      running += quotes_here;
    }
  }
  buckets.start[num_items] = running;
  // All keys seen, and the cells before each word.
  uint64_t* seen = bits[0].data();
  for (int t = 1; t < threads; ++t) {
    for (int64_t w = 0; w < num_words; ++w) seen[w] |= bits[t][w];
  }
  std::vector<int64_t> word_rank(num_words + 1, 0);
  for (int64_t w = 0; w < num_words; ++w) word_rank[w + 1] = word_rank[w] + std::popcount(seen[w]);
  const bool flagged = !quotes.representative.empty();
  const bool weighted = !quotes.weight.empty();
  // Not value-initialised: every element is written by the scatter below.
  buckets.region = UninitialisedArray<RegionIndex>(n);
  buckets.value = UninitialisedArray<double>(n);
  if (flagged) buckets.flag = UninitialisedArray<uint8_t>(n);
  if (weighted) buckets.weight = UninitialisedArray<double>(n);
#pragma omp parallel for schedule(static, 1) num_threads(threads)
  for (int t = 0; t < threads; ++t) {
    int64_t* next = count[t].data();
    for (int64_t q = quote_begin[t]; q < quote_begin[t + 1]; ++q) {
      const int64_t at = next[quote_item[q]]++;
      buckets.region[at] = static_cast<RegionIndex>(quote_region[q]);
      buckets.value[at] = quotes.log_price[q];
      if (flagged) buckets.flag[at] = quotes.representative[q];
      if (weighted) buckets.weight[at] = quotes.weight[q];
    }
  }
  std::vector<std::vector<int64_t>>().swap(count);
  // The buckets hold all the cells need: the quotes go before the cell
  // arrays are allocated, so the two are never held at once.
  *quote_arrays = QuoteArrays();
  const int64_t num_cells = word_rank[num_words];
  SizeCells(num_cells, weighted, threads, cells);
  // Item ranges of about equal quotes per thread.
  std::vector<int32_t> item_begin(threads + 1, 0);
  item_begin[threads] = num_items;
  for (int t = 1; t < threads; ++t) {
    const int64_t target = n * t / threads;
    item_begin[t] = static_cast<int32_t>(
        std::lower_bound(buckets.start.begin(), buckets.start.end() - 1, target) -
        buckets.start.begin());
    item_begin[t] = std::max(item_begin[t], item_begin[t - 1]);
  }
#pragma omp parallel for schedule(static, 1) num_threads(threads)
  for (int t = 0; t < threads; ++t) {
    ItemScratch scratch;
    scratch.slot.assign(num_regions, 0);
    scratch.region.reserve(num_regions);
    scratch.first.reserve(num_regions + 1);
    for (int32_t i = item_begin[t]; i < item_begin[t + 1]; ++i) {
      const int64_t c = BitsBefore(seen, word_rank, static_cast<int64_t>(i) * num_regions);
      WriteItemCells(buckets, seen, num_regions, i, c, &scratch, cells);
    }
  }
}

// Two stable counting sorts (by region, then by item) of quote positions,
// for key ranges too large to count densely.
void CellsBySortedPositions(const QuoteArrays& quotes, int num_regions, int num_items, CellPrices* cells) {
  const int64_t n = static_cast<int64_t>(quotes.size());
  std::vector<uint32_t> by_region(n), order(n);
  {
    std::vector<int64_t> start(num_regions + 1, 0);
    for (int64_t q = 0; q < n; ++q) ++start[quotes.region[q] + 1];
    std::partial_sum(start.begin(), start.end(), start.begin());
    for (int64_t q = 0; q < n; ++q) by_region[start[quotes.region[q]]++] = static_cast<uint32_t>(q);
  }
  {
    std::vector<int64_t> start(num_items + 1, 0);
    for (int64_t q = 0; q < n; ++q) ++start[quotes.item[q] + 1];
    std::partial_sum(start.begin(), start.end(), start.begin());
    for (uint32_t q : by_region) order[start[quotes.item[q]]++] = q;
  }
  std::vector<uint32_t>().swap(by_region);  // released (`= {}` would keep it)
  size_t num_cells = 0;
  for (int64_t k = 0; k < n; ++k) {
    const uint32_t q = order[k], p = k > 0 ? order[k - 1] : 0;
    num_cells += k == 0 || quotes.region[q] != quotes.region[p] || quotes.item[q] != quotes.item[p];
  }
  ReserveCells(num_cells, cells);
  const bool weighted = !quotes.weight.empty();
  if (weighted) cells->weight.reserve(num_cells);
  CellMoments moments;
  int32_t region = -1, item = -1;
  for (uint32_t q : order) {
    if (quotes.region[q] != region || quotes.item[q] != item) {
      if (moments.num_quotes > 0) AppendCell(region, item, moments, weighted, cells);
      moments = CellMoments();
      region = quotes.region[q];
      item = quotes.item[q];
    }
    AddQuote(quotes, q, &moments);
  }
  if (moments.num_quotes > 0) AppendCell(region, item, moments, weighted, cells);
}

}  // namespace

void CellsFromQuotes(QuoteArrays* quotes_in, int num_regions, int num_items, int num_threads,
                     CellPrices* cells) {
  const QuoteArrays& quotes = *quotes_in;
  *cells = CellPrices();
  // A dense count array costs 4 bytes per possible cell: worth it up to a
  // few times the number of quotes.
  const int64_t num_keys = static_cast<int64_t>(num_regions) * num_items;
  if (num_keys <= std::max<int64_t>(4 * static_cast<int64_t>(quotes.size()), 1 << 20)) {
    if (num_regions <= 65536) {
      CellsByDenseKey<uint16_t>(quotes_in, num_regions, num_items, num_threads, cells);
    } else {
      CellsByDenseKey<int32_t>(quotes_in, num_regions, num_items, num_threads, cells);
    }
  } else {
    CellsBySortedPositions(quotes, num_regions, num_items, cells);
  }
  *quotes_in = QuoteArrays();
}

void FillHeadingRanges(Survey* survey) {
  const int num_headings = survey->num_headings();
  survey->heading_range.assign(num_headings, HeadingRange());
  // Items are grouped by heading, so each heading is one item range.
  std::vector<int> first_item(num_headings, -1), end_item(num_headings, -1);
  for (int i = 0; i < survey->num_items(); ++i) {
    const int h = survey->item_heading[i];
    if (first_item[h] < 0) first_item[h] = i;
    end_item[h] = i + 1;
  }
  int next_item = 0;
  for (int h = 0; h < num_headings; ++h) {
    HeadingRange& range = survey->heading_range[h];
    range.item_begin = first_item[h] < 0 ? next_item : first_item[h];
    range.item_end = first_item[h] < 0 ? next_item : end_item[h];
    next_item = range.item_end;
  }
  // The cells are in item order: each heading's end is found by a binary
  // search (a scan of the cells took a serial pass over millions of them).
  const std::vector<int32_t>& cell_item = survey->cells.item;
  auto k = cell_item.begin();
  for (int h = 0; h < num_headings; ++h) {
    HeadingRange& range = survey->heading_range[h];
    range.cell_begin = k - cell_item.begin();
    k = std::lower_bound(k, cell_item.end(), range.item_end);
    range.cell_end = k - cell_item.begin();
  }
}

}  // namespace paritas::internal

namespace paritas {

std::vector<std::vector<int>> HeadingRegionGroups(const Survey& survey, int heading) {
  const HeadingRange& range = survey.heading_range[heading];
  std::vector<int> region(survey.cells.region.begin() + range.cell_begin,
                          survey.cells.region.begin() + range.cell_end);
  std::vector<int> item(range.num_cells());
  for (int64_t k = 0; k < range.num_cells(); ++k) {
    item[k] = survey.cells.item[range.cell_begin + k] - range.item_begin;
  }
  return LinkedRegionGroups(survey.num_regions(), range.num_items(), region, item);
}

}  // namespace paritas
