// What becomes of repeated quote rows under the chosen policy. The rows are
// found as the cells are built (cell_prices.cc): rows equal field for field
// share a cell, whose quotes that stage has together in file order, so the
// earliest row of each run is the one kept whatever the order the file was
// parsed in, and the repeats are left out of the cells there.
#include <algorithm>
#include <cstdint>
#include <string>
#include <utility>
#include <vector>

#include "paritas/base/text.h"
#include "survey/loader_state.h"

namespace paritas::internal {

void HandleDuplicateQuotes(DuplicateQuotePolicy policy, const std::vector<RepeatedQuote>& repeats,
                           size_t price_rows_kept, LoadState* state, Rejections* rejections,
                           const std::vector<InputFileSummary*>& files, LoadSummary* summary) {
  const std::vector<size_t>& begin = state->quote_file_begin;
  // The price file of quote q (quotes are in the order read).
  auto file_of = [&begin](size_t q) {
    return static_cast<size_t>(std::upper_bound(begin.begin(), begin.end(), q) - begin.begin()) -
           1;
  };
  summary->duplicate_policy = policy;
  std::vector<RejectedRow> rejected;
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
      rejections->Count(1, file);
      if (rejections->KeepsRow(RejectionCause::kRow, price_rows_kept + rejected.size())) {
        rejected.push_back({path, line,
                            LocatedMessage(path, line, 0,
                                           "the row repeats " + repeated +
                                               " field for field (duplicate_quotes: reject)"),
                            ""});
      }
    }
  }
  rejections->InsertCounted(price_rows_kept, std::move(rejected));
  state->quote_lines = QuoteLines();
}

}  // namespace paritas::internal
