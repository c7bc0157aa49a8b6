// Deflating money values in any CSV file by regional parities: each value is
// divided by its region's parity / 100, giving it in the prices of the
// reference chosen when the parities were computed.
//
// The input is streamed in blocks over one rolling buffer and the output
// written as it goes, so memory stays constant whatever the file size. The
// original columns are copied byte for byte (quoting, line ends and a leading
// byte-order mark kept) and the new columns appended at the end of each
// record. The output goes to a temporary file renamed into place at the end:
// it appears whole or not at all.
#ifndef PARITAS_USE_DEFLATION_H_
#define PARITAS_USE_DEFLATION_H_

#include <cstdint>
#include <string>
#include <vector>

#include "paritas/base/read_limits.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey_loader.h"

namespace paritas {

struct DeflateOptions {
  // Output folder of `paritas compute`; parities are read from
  // <parities_dir>/parities.csv (columns node, region, parity; an empty
  // parity means the region has none at that node). Required.
  std::string parities_dir;
  // The CSV file to deflate: a header row, then one record per row. Required.
  std::string input_path;
  // The file written: the input plus the new columns. Must differ from the
  // input. Required.
  std::string output_path;
  // Header name of the column holding each row's region code. Default
  // "region".
  std::string region_column = "region";
  // Header names of the money columns to deflate; each gets a column
  // `<name>_real`. At least one, no duplicates.
  std::vector<std::string> value_columns;
  // Node (classification code) whose parities deflate every row. Empty
  // (default) = the root, the first node of parities.csv. Exclusive with
  // node_column.
  std::string node;
  // Header name of a column naming each row's node. Empty (default) = none.
  std::string node_column;
  // kStop (default): report up to max_reported_rows bad rows and write
  // nothing. kSkip: leave bad rows out of the output and list them all in
  // rejected_path.
  InvalidRowPolicy invalid_rows = InvalidRowPolicy::kStop;
  // Bad rows kept in the summary for messages (all are counted). Default 20.
  int max_reported_rows = 20;
  // Accepts negative values (e.g. net incomes). Default false: wages,
  // earnings and spending below zero are data errors.
  bool allow_negative = false;
  // Appends a column `parity` (reference = 100) after the real columns.
  bool include_parity = false;
  // Appends `<name>_real_lower` and `<name>_real_upper` for each value
  // column, from the parity interval in <parities_dir>/sensitivity/bootstrap.csv
  // (columns node, region, lower, upper): real_lower = value / (upper / 100),
  // real_upper = value / (lower / 100). Empty where the interval is missing.
  // The sensitivity run must rest on the same inputs and settings as the
  // parities (their run.json files are compared); otherwise Deflate refuses.
  bool include_interval = false;
  // Digits after the point of the real values (money): -1 (default) writes
  // the shortest text that reads back to the same double; 0 to 17 round.
  int decimals = -1;
  // Where rejected rows are listed under kSkip (header file,line,reason,raw,
  // as the survey's rejected.csv). Empty (default) = the output path with
  // its ".csv" suffix replaced by "_rejected.csv".
  std::string rejected_path;
  // Bytes read from the input per step; bounds the memory used for text.
  // Default 4 MiB; at least 1 KiB (a record longer than a block is carried
  // over until it ends, or until limits.max_record_bytes).
  int64_t block_bytes = 4 << 20;
  // Limits on what is read (see read_limits.h): parities.csv and
  // sensitivity/bootstrap.csv are read whole up to limits.max_file_bytes;
  // the input is streamed, so only its records and fields are limited.
  // Defaults as in ReadLimits; the command line uses them.
  ReadLimits limits;

  bool IsValid(std::string* error) const;
  // rejected_path, or the default derived from output_path.
  std::string RejectedPathUsed() const;
};

enum class DeflateOutcome {
  kNotRun,
  kOk,            // the output was written (rows may have been skipped under kSkip)
  kInvalidInput,  // options, parities or rows invalid, or a file unreadable or unwritable
};

struct DeflateSummary {
  DeflateOutcome outcome = DeflateOutcome::kNotRun;
  std::string message = "not run";
  // Data rows (header excluded, blank lines not counted).
  // num_rows_read = num_rows_written + num_rows_rejected when the run got
  // through the input; under kStop with bad rows nothing is written.
  int64_t num_rows_read = 0;
  int64_t num_rows_written = 0;
  int64_t num_rows_rejected = 0;
  int64_t num_bytes_read = 0;
  // The first max_reported_rows rejected rows.
  std::vector<RejectedRow> rejected_rows;
  // The input file, as given.
  std::string input_path;
  // Node used for every row ("" when a node column names them).
  std::string node_used;
  // Header names of the columns added, in order.
  std::vector<std::string> columns_added;
  // rejected.csv written under kSkip; empty otherwise.
  std::string rejected_path;
  double parities_seconds = 0.0;  // reading parities (and intervals)
  double deflate_seconds = 0.0;   // streaming the input to the output
  double total_seconds = 0.0;

  // One line: "deflated 3,000 rows of wages.csv by node 'all': 3,000
  // written, 0 rejected (0.01 s)".
  std::string BriefReport() const;
};

// Deflates options.input_path into options.output_path. Resets `summary`;
// returns true when the output was written. Never aborts on bad data.
// Row messages have the form "wages.csv:12:4: hourly_wage 'abc' is not a
// number" (path as given, line, 1-based column).
bool Deflate(const DeflateOptions& options, DeflateSummary* summary);

}  // namespace paritas

#endif  // PARITAS_USE_DEFLATION_H_
