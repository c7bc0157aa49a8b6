// What the phases of the survey loader share: the state being built, the
// collection of rejected rows and the checks every table applies. The small
// tables (small_tables.cc) and prices.csv (price_reader.cc) fill a LoadState;
// survey_build.cc turns it into the Survey; survey_loader.cc runs the phases.
#ifndef PARITAS_INTERNAL_SURVEY_LOADER_STATE_H_
#define PARITAS_INTERNAL_SURVEY_LOADER_STATE_H_

#include <algorithm>
#include <cstddef>
#include <cstdint>
#include <string>
#include <set>
#include <string_view>
#include <unordered_map>
#include <utility>
#include <vector>

#include "paritas/base/code_table.h"
#include "paritas/base/csv.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey.h"
#include "paritas/survey/survey_loader.h"
#include "survey/cell_prices.h"

namespace paritas::internal {

// Collects rejected rows under the chosen policy.
class Rejections {
 public:
  Rejections(const LoadOptions& options, LoadSummary* summary)
      : options_(options), summary_(summary) {}

  // Counts rejected rows whose text is not kept.
  void Count(int64_t num_rows, InputFileSummary* file,
             RejectionCause cause = RejectionCause::kRow) {
    file->rows_rejected += num_rows;
    summary_->num_rows_rejected += num_rows;
    if (cause == RejectionCause::kRejectedCode) {
      file->rows_rejected_by_cascade += num_rows;
      summary_->num_rows_rejected_by_cascade += num_rows;
    }
  }

  // Counts a rejected row and keeps it when the policy says so: every row
  // under kSkip, under kStop the first rows that are not of rejected codes.
  void Add(RejectedRow row, InputFileSummary* file) {
    Count(1, file, row.cause);
    if (KeepsRow(row.cause, summary_->rejected_rows.size())) {
      summary_->rejected_rows.push_back(std::move(row));
    }
  }

  // True when a row of `cause` is kept with `num_kept` rows kept already.
  bool KeepsRow(RejectionCause cause, size_t num_kept) const {
    return options_.invalid_rows == InvalidRowPolicy::kSkip ||
           (cause != RejectionCause::kRejectedCode &&
            static_cast<int>(num_kept) < options_.max_reported_rows);
  }

 private:
  const LoadOptions& options_;
  LoadSummary* summary_;
};

// Column positions of one table, found by name.
struct Columns {
  std::vector<int> index;  // per wanted column, -1 when absent
  int num_fields = 0;
  std::vector<std::string> names;  // the header's names, trimmed
};

// Reads the header row (fields separated by `delimiter`), checks that it is
// UTF-8, its required and duplicated columns, and records the ignored ones
// in `file`.
bool ReadHeader(CsvReader* reader, const std::string& path, char delimiter,
                const std::vector<std::string>& wanted, const std::vector<bool>& required,
                Columns* columns, InputFileSummary* file, std::string* error);

// When `record` holds text that is not UTF-8, sets *column (1-based) and
// *problem, e.g. "region 'Z\xfcrich' is not valid UTF-8 (the file may be
// Latin-1 ...)", the field named by its header column in `names`, and
// returns true.
bool RowUtf8Problem(const CsvRecord& record, char delimiter, const std::vector<std::string>& names,
                    int64_t* line, int* column, std::string* problem);

// Checks a code field; returns an empty string when valid, else the reason.
std::string CheckCode(std::string_view code, const char* what);

// The reason for rejecting a row of `found` fields under a header of `expected`.
std::string FieldCountProblem(size_t found, int expected);
// The column a field-count message points at: the first field missing, or
// the first one too many.
int FieldCountColumn(size_t found, int expected);

// The lines of quotes taken in order, kept as runs of quotes on
// consecutive lines: quote q lies on run_line[k] + (q - run_quote[k]) for
// the last run k with run_quote[k] <= q. A file of one-line records with no
// rows rejected is one run per chunk, instead of 8 bytes per quote.
struct QuoteLines {
  std::vector<size_t> run_quote;
  std::vector<int64_t> run_line;

  // Notes that quote q (the next after the ones added) lies on `line`.
  void Add(size_t q, int64_t line) {
    if (!run_quote.empty() &&
        line == run_line.back() + static_cast<int64_t>(q - run_quote.back())) {
      return;
    }
    run_quote.push_back(q);
    run_line.push_back(line);
  }
  // Adds the runs of `other`, whose quote 0 is quote `offset` here.
  void Append(const QuoteLines& other, size_t offset) {
    for (size_t k = 0; k < other.run_quote.size(); ++k) {
      Add(offset + other.run_quote[k], other.run_line[k]);
    }
  }
  // The line of quote q (one that was added).
  int64_t Of(size_t q) const {
    const size_t k = static_cast<size_t>(
        std::upper_bound(run_quote.begin(), run_quote.end(), q) - run_quote.begin() - 1);
    return run_line[k] + static_cast<int64_t>(q - run_quote[k]);
  }
  void Clear() {
    run_quote.clear();
    run_line.clear();
  }
};

// ---------------------------------------------------------------------------
// Shared state while loading.

struct LoadState {
  const RunConfig* config = nullptr;
  // Regions: fixed by regions.csv when given; otherwise grows.
  bool regions_fixed = false;
  CodeTable regions;
  std::vector<std::string> region_name;
  std::vector<double> region_population;
  // Headings: fixed by the classification when given; otherwise grows.
  bool headings_fixed = false;
  CodeTable headings;
  // Items with their heading and where that was first stated.
  CodeTable items;
  std::vector<int> item_heading;
  // "items.csv:12", "line 40" (one price file) or "rent.csv:40" (several).
  std::vector<std::string> item_origin;
  std::vector<std::string> item_description, item_unit;
  // reference_quantity of items.csv; NaN when not given.
  std::vector<double> item_reference_quantity;
  bool has_catalog = false;
  // Quotes used, in file order, with state indices of region and item, and
  // their lines (until duplicates are handled).
  QuoteArrays quotes;
  QuoteLines quote_lines;
  int64_t num_quotes = 0;
  // Index of the first quote of each price file, in the order read.
  std::vector<size_t> quote_file_begin;
  // LoadSummary::num_quote_array_moves.
  int num_quote_array_moves = 0;
  // Items whose quotes gave a quantity without the item having a
  // reference_quantity (taken as 1), and those quotes.
  std::set<int> items_without_reference;
  int64_t num_quotes_without_reference = 0;
  // Expenditure rows.
  struct Spending {
    int region, heading;
    double value;
  };
  std::vector<Spending> spending;
  // expenditure.csv has no region column: its rows are the national
  // basket (Spending::region is -1).
  bool national_weights = false;
  // Rows of the external parities file (state indices; ln parity, log_se
  // NaN when not given).
  struct ExternalParity {
    int region, heading;
    double log_parity, log_se;
  };
  std::vector<ExternalParity> external;
  // Regions and items rejected in regions.csv and items.csv (never
  // accepted), with the rows of other files left out because of them; code
  // -> index in rejected_codes.
  std::vector<RejectedCode> rejected_codes;
  std::unordered_map<std::string, int> rejected_region_index;
  std::unordered_map<std::string, int> rejected_item_index;
  // Items filed under a second heading; item code -> index in
  // heading_conflicts.
  std::vector<HeadingConflict> heading_conflicts;
  std::unordered_map<std::string, int> heading_conflict_index;
};

// Remembers the first rejected row of each code of regions.csv or
// items.csv; Finish keeps the codes that were never accepted.
class RejectedCodeCollector {
 public:
  RejectedCodeCollector(const char* kind, const std::string& path) : kind_(kind), path_(path) {}
  // A row with a valid `code` was rejected for `reason` at `line`.
  void Note(std::string_view code, int64_t line, const std::string& reason);
  // Adds the codes `accepted` does not hold to the state's rejected codes.
  void Finish(const CodeTable& accepted, LoadState* state);

 private:
  const char* kind_;
  const std::string& path_;
  std::vector<RejectedCode> first_;
  std::unordered_map<std::string, int> index_;
};

// The reason for a row left out because its region or item was rejected:
// "region 'NRD' was rejected at regions.csv:5".
std::string RejectedCodeReason(const RejectedCode& code);

// What became of a data row: used (empty reason), or rejected for `reason`

// The phases, in the order LoadSurvey runs them. Each returns false with a
// message in *error when the file cannot be read at all; rows it cannot use
// go to `rejections`.
bool ReadRegions(const std::string& path, LoadState* state, Rejections* rejections,
                 InputFileSummary* file, std::string* error);
bool ReadItems(const std::string& path, LoadState* state, Rejections* rejections,
               InputFileSummary* file, std::string* error);
// Reads one price file; `setting` names it in messages ("survey.prices" or
// "survey.prices[1]"). Quotes are appended to the state's. `later_bytes`:
// the size of the price files to be read after this one (0 when none), for
// which the quote arrays' first reservation makes room too.
bool ReadPrices(const PriceSource& source, const std::string& setting, const LoadOptions& options,
                double later_bytes, LoadState* state, Rejections* rejections, InputFileSummary* file,
                std::string* error);
bool ReadExpenditure(const std::string& path, LoadState* state, Rejections* rejections,
                     InputFileSummary* file, std::string* error);
// Reads survey.external_parities (heading,region,parity[,log_se]); its
// regions and headings must be known from the files read before it.
bool ReadExternalParities(const std::string& path, LoadState* state, Rejections* rejections,
                          InputFileSummary* file, std::string* error);
// Finds quote rows repeating an earlier row field for field, in the same
// price file or an earlier one (columns matched by name), and applies
// `policy`: keep counts them; drop leaves the repeats out (counted as
// rejected rows of their file, not as invalid rows); reject rejects each
// repeat as an invalid row naming the line it repeats. `files` are the price
// files' summaries in the order read (state->quote_file_begin). Empties the
// row hashes and lines of the quotes. Uses up to `num_threads` (>= 1)
// threads; the result does not depend on their number.
void HandleDuplicateQuotes(DuplicateQuotePolicy policy, int num_threads, LoadState* state,
                           Rejections* rejections, const std::vector<InputFileSummary*>& files,
                           LoadSummary* summary);
// Orders regions, headings and items, builds the cells from the quotes
// (which it empties) and fills the expenditure table.
void BuildSurvey(LoadState* state, int num_threads, Survey* survey);

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_SURVEY_LOADER_STATE_H_
