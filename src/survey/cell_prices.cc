// Cells are built by counting sort of the quotes on dense indices: linear in
// the number of quotes, and a stable order that is the same on every run.
#include "survey/cell_prices.h"

#include <algorithm>
#include <cmath>
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

// The cells of quotes already grouped by key (item-major, then region):
// key k holds value[start[k] .. start[k + 1]), thread t takes the keys
// [key_begin[t], key_begin[t + 1]) and writes its cells after those of the
// threads before it, so the order does not depend on the thread count. `flag`
// and `weight` are empty when the quotes have none.
void WriteCells(const std::vector<uint32_t>& start, const std::vector<int64_t>& key_begin,
                int threads, int num_regions, const std::vector<double>& value,
                const std::vector<uint8_t>& flag, const std::vector<double>& weight,
                CellPrices* cells) {
  const bool flagged = !flag.empty();
  const bool weighted = !weight.empty();
  // Cells per key range, to know where each thread writes.
  std::vector<int64_t> cell_begin(threads + 1, 0);
#pragma omp parallel for schedule(static, 1) num_threads(threads)
  for (int t = 0; t < threads; ++t) {
    int64_t num_cells = 0;
    for (int64_t k = key_begin[t]; k < key_begin[t + 1]; ++k) num_cells += start[k + 1] > start[k];
    cell_begin[t + 1] = num_cells;
  }
  for (int t = 0; t < threads; ++t) cell_begin[t + 1] += cell_begin[t];
  const size_t num_cells = static_cast<size_t>(cell_begin[threads]);
  cells->region.resize(num_cells);
  cells->item.resize(num_cells);
  cells->log_price.resize(num_cells);
  cells->log_sd.resize(num_cells);
  cells->log_min.resize(num_cells);
  cells->log_max.resize(num_cells);
  cells->num_quotes.resize(num_cells);
  cells->representative.resize(num_cells);
  if (weighted) cells->weight.resize(num_cells);
#pragma omp parallel for schedule(static, 1) num_threads(threads)
  for (int t = 0; t < threads; ++t) {
    int64_t c = cell_begin[t];
    for (int64_t k = key_begin[t]; k < key_begin[t + 1]; ++k) {
      if (start[k + 1] == start[k]) continue;
      CellMoments moments;
      for (uint32_t at = start[k]; at < start[k + 1]; ++at) {
        if (weighted) {
          moments.AddWeighted(value[at], flagged && flag[at] != 0, weight[at]);
        } else {
          moments.Add(value[at], flagged && flag[at] != 0);
        }
      }
      cells->region[c] = static_cast<int32_t>(k % num_regions);
      cells->item[c] = static_cast<int32_t>(k / num_regions);
      cells->log_price[c] = moments.mean;
      cells->log_sd[c] = moments.LogSd(weighted);
      if (weighted) cells->weight[c] = moments.sum_weight;
      cells->log_min[c] = moments.min;
      cells->log_max[c] = moments.max;
      cells->num_quotes[c] = moments.num_quotes;
      cells->representative[c] = moments.representative;
      ++c;
    }
  }
}

// One counting sort on the dense cell key item x R + region: the quotes'
// values are scattered straight into key order, so the cells are then read
// off sequentially. Used when the key range is small enough to count.
// Each thread counts and scatters its own contiguous range of quotes, with
// its own offsets: within a key, thread t's quotes land after those of the
// threads before it, so every cell sees its quotes in file order whatever
// the number of threads, and no thread scans the quotes of another.
void CellsByDenseKey(const QuoteArrays& quotes, int num_regions, int num_items, int num_threads,
                     CellPrices* cells) {
  const int64_t n = static_cast<int64_t>(quotes.size());
  const int64_t num_keys = static_cast<int64_t>(num_regions) * num_items;
  const int32_t* quote_region = quotes.region.data();
  const int32_t* quote_item = quotes.item.data();
  auto key_of = [&](int64_t q) {
    return static_cast<int64_t>(quote_item[q]) * num_regions + quote_region[q];
  };
  // A thread's count array costs more to clear and combine than its share
  // of the counting saves on a small survey.
  const int threads = n < (int64_t{1} << 20) ? 1 : std::max(1, num_threads);
  std::vector<int64_t> quote_begin(threads + 1), key_begin(threads + 1);
  for (int t = 0; t <= threads; ++t) {
    quote_begin[t] = n * t / threads;
    key_begin[t] = num_keys * t / threads;
  }
  // offset[t][k]: quotes of key k in thread t's range, then where the next
  // of them goes. Each array is first touched by the thread that fills it.
  std::vector<std::vector<uint32_t>> offset(threads);
#pragma omp parallel for schedule(static, 1) num_threads(threads)
  for (int t = 0; t < threads; ++t) {
    offset[t].assign(num_keys, 0);
    uint32_t* count = offset[t].data();
    for (int64_t q = quote_begin[t]; q < quote_begin[t + 1]; ++q) ++count[key_of(q)];
  }
  // Exclusive prefix sums in key-major, thread-minor order, in two passes
  // over key ranges: the quotes of each range, then the offsets within it.
  std::vector<uint32_t> start(num_keys + 1, 0);
  std::vector<uint64_t> range_quotes(threads + 1, 0);
#pragma omp parallel for schedule(static, 1) num_threads(threads)
  for (int r = 0; r < threads; ++r) {
    uint64_t total = 0;
    for (int64_t k = key_begin[r]; k < key_begin[r + 1]; ++k) {
      for (int t = 0; t < threads; ++t) total += offset[t][k];
    }
    range_quotes[r + 1] = total;
  }
  for (int r = 0; r < threads; ++r) range_quotes[r + 1] += range_quotes[r];
#pragma omp parallel for schedule(static, 1) num_threads(threads)
  for (int r = 0; r < threads; ++r) {
    uint32_t running = static_cast<uint32_t>(range_quotes[r]);
    for (int64_t k = key_begin[r]; k < key_begin[r + 1]; ++k) {
      start[k] = running;
      for (int t = 0; t < threads; ++t) {
        const uint32_t count = offset[t][k];
        offset[t][k] = running;
        running += count;
      }
    }
  }
  start[num_keys] = static_cast<uint32_t>(n);
  // Key ranges for the moments, split by quotes.
  if (threads > 1) {
    for (int t = 1; t < threads; ++t) {
      const uint32_t target = static_cast<uint32_t>(static_cast<uint64_t>(n) * t / threads);
      key_begin[t] = std::lower_bound(start.begin(), start.end() - 1, target) - start.begin();
      key_begin[t] = std::max(key_begin[t], key_begin[t - 1]);
    }
  }
  const bool flagged = !quotes.representative.empty();
  const bool weighted = !quotes.weight.empty();
  std::vector<double> value(n);
  std::vector<uint8_t> flag(flagged ? n : 0);
  std::vector<double> weight(weighted ? n : 0);
#pragma omp parallel for schedule(static, 1) num_threads(threads)
  for (int t = 0; t < threads; ++t) {
    uint32_t* next = offset[t].data();
    for (int64_t q = quote_begin[t]; q < quote_begin[t + 1]; ++q) {
      const uint32_t at = next[key_of(q)]++;
      value[at] = quotes.log_price[q];
      if (flagged) flag[at] = quotes.representative[q];
      if (weighted) weight[at] = quotes.weight[q];
    }
  }
  offset = {};
  WriteCells(start, key_begin, threads, num_regions, value, flag, weight, cells);
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
  by_region = {};
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

void CellsFromQuotes(const QuoteArrays& quotes, int num_regions, int num_items, int num_threads,
                     CellPrices* cells) {
  *cells = CellPrices();
  // A dense count array costs 4 bytes per possible cell: worth it up to a
  // few times the number of quotes.
  const int64_t num_keys = static_cast<int64_t>(num_regions) * num_items;
  if (num_keys <= std::max<int64_t>(4 * static_cast<int64_t>(quotes.size()), 1 << 20)) {
    CellsByDenseKey(quotes, num_regions, num_items, num_threads, cells);
  } else {
    CellsBySortedPositions(quotes, num_regions, num_items, cells);
  }
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
  const CellPrices& cells = survey->cells;
  int64_t k = 0;
  for (int h = 0; h < num_headings; ++h) {
    HeadingRange& range = survey->heading_range[h];
    range.cell_begin = k;
    while (k < static_cast<int64_t>(cells.size()) && cells.item[k] < range.item_end) ++k;
    range.cell_end = k;
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
