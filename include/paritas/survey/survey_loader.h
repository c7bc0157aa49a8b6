// Reading and validating the survey files into a Survey. Nothing is lost and
// nothing is silent: every data row is either used or rejected with a reason
// that names file, line and column, and the counts reconcile per file.
#ifndef PARITAS_SURVEY_SURVEY_LOADER_H_
#define PARITAS_SURVEY_SURVEY_LOADER_H_

#include <cstdint>
#include <string>
#include <vector>

#include "paritas/survey/config.h"
#include "paritas/survey/survey.h"

namespace paritas {

// A data row left out of the survey.
struct RejectedRow {
  std::string file;    // path as given in the configuration
  int64_t line = 0;    // 1-based line on which the row starts
  std::string reason;  // full message, e.g. "prices.csv:118:3: price '-4.10' is not a positive number"
  std::string raw;     // the row's text as read
};

// Accounting for one input file. rows_read = rows_used + rows_rejected.
struct InputFileSummary {
  std::string role;  // "regions", "items", "prices" or "expenditure"
  std::string path;
  bool given = false;
  int64_t size_bytes = 0;
  // SHA-256 of the file's bytes, 64 lowercase hex digits.
  std::string sha256;
  int64_t rows_read = 0;  // data rows, header excluded, blank lines not counted
  int64_t rows_used = 0;
  int64_t rows_rejected = 0;
  // Header columns that paritas does not use, in header order.
  std::vector<std::string> ignored_columns;
};

struct LoadOptions {
  InvalidRowPolicy invalid_rows = InvalidRowPolicy::kStop;
  // Rejected rows kept for the message under kStop (all are kept under kSkip).
  int max_reported_rows = 20;
  // Worker threads for reading prices; 0 = all cores.
  int num_threads = 0;
  // Bytes of prices.csv parsed per step; bounds the memory used for text.
  int64_t block_bytes = 64 << 20;

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
  // Under kSkip every rejected row; under kStop the first max_reported_rows.
  std::vector<RejectedRow> rejected_rows;
  int64_t num_rows_rejected = 0;
  // Quote rows of prices.csv repeating an earlier row field for field (each
  // repeat counted, the first row not), whatever duplicate_quotes did with
  // them; and the first such pair, e.g. "prices.csv:57 repeats line 12".
  int64_t num_duplicate_quotes = 0;
  std::string duplicate_example;
  DuplicateQuotePolicy duplicate_policy = DuplicateQuotePolicy::kKeep;
  std::vector<std::string> warnings;
  double read_seconds = 0.0;   // reading and validating all files
  double cells_seconds = 0.0;  // building the cell table

  // One line: "read 12,345 quotes for 16 regions, 200 items, 30 headings; 0 rows rejected".
  std::string BriefReport() const;
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
