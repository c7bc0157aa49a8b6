// Repeated quote rows are found by sorting (row hash, file position) pairs:
// O(n log n) once per load, and the earliest row of each run is the one kept,
// whatever the order the file was parsed in.
#include <algorithm>
#include <cstdint>
#include <string>
#include <utility>
#include <vector>

#include "paritas/base/text.h"
#include "survey/loader_state.h"

namespace paritas::internal {
namespace {

// Keeps the quotes whose `keep` flag is set, in order.
void CompactQuotes(const std::vector<char>& keep, QuoteArrays* quotes) {
  size_t out = 0;
  const bool flagged = !quotes->representative.empty();
  const bool weighted = !quotes->weight.empty();
  for (size_t q = 0; q < keep.size(); ++q) {
    if (!keep[q]) continue;
    quotes->region[out] = quotes->region[q];
    quotes->item[out] = quotes->item[q];
    quotes->log_price[out] = quotes->log_price[q];
    if (flagged) quotes->representative[out] = quotes->representative[q];
    if (weighted) quotes->weight[out] = quotes->weight[q];
    ++out;
  }
  quotes->region.resize(out);
  quotes->item.resize(out);
  quotes->log_price.resize(out);
  if (flagged) quotes->representative.resize(out);
  if (weighted) quotes->weight.resize(out);
}

}  // namespace

void HandleDuplicateQuotes(DuplicateQuotePolicy policy, LoadState* state, Rejections* rejections,
                           const std::vector<InputFileSummary*>& files, LoadSummary* summary) {
  QuoteArrays& quotes = state->quotes;
  const std::vector<size_t>& begin = state->quote_file_begin;
  // The price file of quote q (quotes are in the order read).
  auto file_of = [&begin](size_t q) {
    return static_cast<size_t>(std::upper_bound(begin.begin(), begin.end(), q) - begin.begin()) -
           1;
  };
  summary->duplicate_policy = policy;
  const size_t n = quotes.size();
  std::vector<std::pair<uint64_t, uint32_t>> order(n);
  for (size_t q = 0; q < n; ++q) order[q] = {quotes.row_hash[q], static_cast<uint32_t>(q)};
  std::sort(order.begin(), order.end());
  // repeats[q] = the quote q repeats, or -1.
  std::vector<int64_t> repeats(n, -1);
  for (size_t k = 1; k < n; ++k) {
    const uint32_t q = order[k].second;
    const uint32_t first = order[k - 1].first == order[k].first && repeats[order[k - 1].second] >= 0
                               ? static_cast<uint32_t>(repeats[order[k - 1].second])
                               : order[k - 1].second;
    if (order[k - 1].first == order[k].first && quotes.region[q] == quotes.region[first] &&
        quotes.item[q] == quotes.item[first] && quotes.log_price[q] == quotes.log_price[first]) {
      repeats[q] = first;
    }
  }
  std::vector<char> keep(n, 1);
  for (size_t q = 0; q < n; ++q) {
    if (repeats[q] < 0) continue;
    const int64_t line = quotes.line[q], original = quotes.line[repeats[q]];
    const size_t k = file_of(q), first = file_of(static_cast<size_t>(repeats[q]));
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
    keep[q] = 0;
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
    CompactQuotes(keep, &quotes);
  }
  quotes.row_hash = {};
  quotes.line = {};
}

}  // namespace paritas::internal
