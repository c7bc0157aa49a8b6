// Reading and validating the survey files into a Survey. Nothing is lost and
// nothing is silent: every data row is either used or rejected with a reason
// that names file, line and column, and the counts reconcile per file.
#ifndef PARITAS_SURVEY_SURVEY_LOADER_H_
#define PARITAS_SURVEY_SURVEY_LOADER_H_

#include <cstdint>
#include <string>
#include <utility>
#include <vector>

#include "paritas/survey/config.h"
#include "paritas/survey/survey.h"

namespace paritas {

// Why a data row is left out.
enum class RejectionCause {
  kRow,              // the row itself breaks a rule (default)
  kRejectedCode,     // its region or item was rejected in regions.csv or items.csv
  kHeadingConflict,  // its item is filed under another heading before it
};

// A data row left out of the survey.
struct RejectedRow {
  std::string file;    // path as given in the configuration (the price file of the row)
  int64_t line = 0;    // 1-based line on which the row starts
  std::string reason;  // full message, e.g. "prices.csv:118:3: price '-4.10' is not a positive number"
  std::string raw;     // the row's text as read
  // Rows of the last two causes are listed in rejected.csv one by one but
  // described once per code (LoadSummary::rejected_codes, heading_conflicts)
  // wherever rows are shown.
  RejectionCause cause = RejectionCause::kRow;
};

// A region of regions.csv or an item of items.csv whose rows were all
// rejected, and the rows of the other files left out because of it (they
// would otherwise each be rejected as "not in regions.csv").
struct RejectedCode {
  std::string kind;  // "region" or "item"
  std::string code;
  std::string file;    // regions.csv or items.csv, as given
  int64_t line = 0;    // the code's first rejected row
  std::string reason;  // that row's problem, without its location
  int64_t num_price_rows = 0;
  int64_t num_expenditure_rows = 0;  // always 0 for an item
  int64_t num_external_parity_rows = 0;  // always 0 for an item

  // "region 'NRD' was rejected at regions.csv:5 (population '1,200,000' is
  // not a number; ...), so its 57 price rows and 8 expenditure rows are left
  // out" (and its external parity rows, when it has some).
  std::string Describe() const;
};

// An item filed under different headings by rows of prices.csv (or by
// items.csv and prices.csv). The first statement wins; rows stating another
// heading are rejected and counted here per heading.
struct HeadingConflict {
  std::string item;
  std::string heading_used;
  std::string origin_used;    // where it was first stated: "items.csv:4" or "prices.csv:2"
  int64_t num_rows_used = 0;  // price rows of the item used
  struct Other {
    std::string heading;
    int64_t num_rows = 0;  // rows rejected for stating it
    int64_t first_line = 0;
    std::string file;  // the price file of first_line; empty = Describe's prices_path
  };
  std::vector<Other> others;  // in order of first appearance

  // "item 'milk' is filed under 2 headings: 'dairy' (first at prices.csv:2;
  // 120 rows used) and 'food' (3 rows from prices.csv:500, rejected)".
  std::string Describe(const std::string& prices_path) const;
};

// Accounting for one input file. rows_read = rows_used + rows_rejected.
struct InputFileSummary {
  // "regions", "items", "prices" or "expenditure"; one "prices" entry per
  // price file, in the order of survey.prices.
  std::string role;
  std::string path;
  // Delimiter and decimal mark the file was read with.
  CsvFormat format;
  bool given = false;
  int64_t size_bytes = 0;
  // SHA-256 of the file's bytes, 64 lowercase hex digits.
  std::string sha256;
  int64_t rows_read = 0;  // data rows, header excluded, blank lines not counted
  int64_t rows_used = 0;
  int64_t rows_rejected = 0;
  // Of rows_rejected, those left out only because their region or item was
  // rejected in regions.csv or items.csv (RejectionCause::kRejectedCode).
  int64_t rows_rejected_by_cascade = 0;
  // Header columns that paritas does not use, in header order.
  std::vector<std::string> ignored_columns;
  // Price files: survey.prices' column mapping (our name -> the file's
  // header), empty when the headers are ours.
  std::vector<std::pair<std::string, std::string>> columns;
};

struct LoadOptions {
  InvalidRowPolicy invalid_rows = InvalidRowPolicy::kStop;
  // Rejected rows kept for the message under kStop (all are kept under kSkip).
  int max_reported_rows = 20;
  // Worker threads for reading prices; 0 = all cores.
  int num_threads = 0;
  // Bytes of prices.csv parsed per step; bounds the memory used for text
  // (two blocks of text, one being parsed and the next being read, and the
  // chunk arrays of one block). Default 16 MiB: on a 188 MB file, 64 MiB
  // blocks raised the load's peak memory by about 65 MB and were not faster.
  int64_t block_bytes = 16 << 20;
  // Bytes of a block one task parses (default 2 MiB; the block's last two
  // chunks' worth is cut a quarter as long, so that the threads waiting for
  // the block's last chunk wait for a short one). Chunk boundaries depend on
  // the data and this size only, and the survey, counts and messages do not
  // depend on them; tests and the fuzzer set a few bytes to cross many
  // boundaries. 1 MiB chunks throughout read L more slowly (0.484 s against
  // 0.436 s with 2 MiB on two threads, medians of 5; bench/HISTORY.md).
  int64_t chunk_bytes = 2 << 20;

  bool IsValid(std::string* error) const;
};

enum class LoadOutcome {
  kNotRun,
  kOk,            // the survey was read (rows may have been skipped under kSkip)
  kInvalidInput,  // a file or a row is invalid; see message and rejected_rows
};

struct LoadSummary {
  LoadOutcome outcome = LoadOutcome::kNotRun;
  std::string message = "not run";
  std::vector<InputFileSummary> files;
  // Under kSkip every rejected row; under kStop the first max_reported_rows
  // rejected for their own fault (the others are described by
  // rejected_codes and heading_conflicts).
  std::vector<RejectedRow> rejected_rows;
  int64_t num_rows_rejected = 0;
  // Quote rows repeating an earlier row field for field, in their price file
  // or an earlier one (each repeat counted, the first row not), whatever
  // duplicate_quotes did with them; and the first such pair, e.g.
  // "prices.csv:57 repeats line 12" or "rents.csv:3 repeats prices.csv:40".
  int64_t num_duplicate_quotes = 0;
  std::string duplicate_example;
  DuplicateQuotePolicy duplicate_policy = DuplicateQuotePolicy::kKeep;
  // Of num_rows_rejected, those of rejected regions and items.
  int64_t num_rows_rejected_by_cascade = 0;
  // Regions and items rejected with their rows elsewhere, in file order.
  std::vector<RejectedCode> rejected_codes;
  // Items filed under more than one heading, in order of the first conflict.
  std::vector<HeadingConflict> heading_conflicts;
  // Problems that do not reject rows, e.g. quantities of items without a
  // reference_quantity (taken per 1 unit).
  std::vector<std::string> warnings;
  // Wall seconds from the start of the load to the end of reading and
  // validating every file, and from there to the end of the load (the cell
  // table, external parities, groups): the two cover the load whole.
  double read_seconds = 0.0;
  double cells_seconds = 0.0;
  // Times a block of a price file did not fit the room reserved for the
  // quotes (at the first file's first block, from the sizes of all the price
  // files and that file's quotes and slots per byte) and the quotes so far
  // moved to a larger reservation: 0 when the first estimate held.
  int num_quote_array_moves = 0;

  // One line: "read 12,345 quotes for 16 regions, 200 items, 30 headings; 0 rows rejected".
  std::string BriefReport() const;
  // The rejected rows to show, one line each: up to `limit` rejected for
  // their own fault (then "... N more"), then one line per heading conflict
  // and per rejected code.
  std::string DescribeRejections(size_t limit) const;
};

// Reads the survey files named in `config`, using its classification (or a
// flat root over every heading when it has none). Returns true when the
// survey can be used (outcome kOk); never aborts on bad data.
bool LoadSurvey(const RunConfig& config, const LoadOptions& options, Survey* survey,
                LoadSummary* summary);

// The text of rejected.csv: header `file,line,reason,raw`, one row per rejected row.
std::string RejectedRowsCsv(const std::vector<RejectedRow>& rows);

}  // namespace paritas

#endif  // PARITAS_SURVEY_SURVEY_LOADER_H_
