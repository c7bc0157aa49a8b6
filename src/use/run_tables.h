// Reading the small tables of a run folder (parities.csv,
// sensitivity/bootstrap.csv) whole, shared by the commands that use a
// finished run: deflate and publish. Messages name the file, line and column.
#ifndef PARITAS_INTERNAL_USE_RUN_TABLES_H_
#define PARITAS_INTERNAL_USE_RUN_TABLES_H_

#include <cstdint>
#include <functional>
#include <string>
#include <string_view>
#include <vector>

#include "base/magnitude.h"
#include "paritas/base/read_limits.h"

namespace paritas::internal {

// Lists header names for a message: a header of garbage can hold millions,
// so only the first 20 are named.
std::string ListedNames(const std::vector<std::string>& names);

// A data row of a table read by ReadTable: the wanted fields, trimmed (empty
// when the column is absent), and their 1-based columns (0 when absent).
struct TableRow {
  int64_t line = 0;
  std::vector<std::string_view> fields;
  std::vector<int> columns;
};

// Reads a comma-separated table whole, up to limits.max_file_bytes, and
// hands each data row to `handle`, which returns false with a message to
// stop. A column of `wanted` whose `required` is true must be in the header.
// Returns false with a message naming the file.
bool ReadTable(const std::string& path, const ReadLimits& limits,
               const std::vector<std::string>& wanted, const std::vector<bool>& required,
               const std::function<bool(const TableRow&, std::string*)>& handle,
               std::string* error);

// Whether `contents` is the file `relative` (e.g. "parities.csv") of the
// run folder `dir` as the run that wrote it recorded it: run.json's
// "outputs" lists every file the run wrote with its SHA-256. True when the
// digest matches, and when `dir` holds no run.json, or a record with no
// digests (a folder made by hand, e.g. parities from elsewhere for deflate,
// or a record of schema 1, which lists names only); false with a message
// when the file changed after the run, is not among the files the record
// lists, or the record cannot be read, so that figures are never read under
// the provenance of a run that did not write them. With `expected_run_id`
// (the run id the caller read from run.json before), also false when the
// record now holds another run (the folder was replaced meanwhile).
bool MatchesRunRecord(const std::string& dir, const std::string& relative,
                      std::string_view contents, std::string* error,
                      const std::string& expected_run_id = "");

// ReadTable for the file `relative` of the run folder `dir`, checked with
// MatchesRunRecord before a row is read.
bool ReadRunTable(const std::string& dir, const std::string& relative, const ReadLimits& limits,
                  const std::vector<std::string>& wanted, const std::vector<bool>& required,
                  const std::function<bool(const TableRow&, std::string*)>& handle,
                  std::string* error, const std::string& expected_run_id = "");
// The same for the file at `path`, in the run folder that holds it.
bool ReadRunTableAt(const std::string& path, const ReadLimits& limits,
                    const std::vector<std::string>& wanted, const std::vector<bool>& required,
                    const std::function<bool(const TableRow&, std::string*)>& handle,
                    std::string* error);

// Parses an optional positive number of a parities table: empty = NaN.
// `what` names the column in the message ("parity", "lower"); `range` is
// kResultRange for parities a run wrote, kInputRange for price indices.
bool ParseParity(const std::string& path, int64_t line, int column, const char* what,
                 std::string_view text, double* value, std::string* error,
                 const FigureRange& range = kResultRange);

// Parses an optional non-negative figure a run wrote (spending, an index of
// real spending per head): empty = NaN; 0, or positive within `range` (the
// run's input range for the spending it read).
bool ParseNonNegative(const std::string& path, int64_t line, int column, const char* what,
                      std::string_view text, double* value, std::string* error,
                      const FigureRange& range = kResultRange);

// Parses the interval bounds of fields `lower` and `upper` of `row` as
// sensitivity writes them: both empty (NaN, no interval), or both parities
// (ParseParity) with the lower not above the upper.
bool ParseIntervalBounds(const std::string& path, const TableRow& row, int lower, int upper,
                         double* lower_value, double* upper_value, std::string* error);

// The command that writes the intervals of a run folder: "run 'paritas
// sensitivity CONFIG --output DIR' with the configuration and options of the
// compute run" (CONFIG from run.json when it names one).
std::string SensitivityAdvice(const std::string& parities_dir);

// True when <parities_dir>/sensitivity/run.json rests on the same inputs and
// settings as <parities_dir>/run.json (RunDifferences); otherwise false with
// a message listing the differences, since an interval of another comparison
// would bracket the wrong figure.
bool SameRunSettings(const std::string& parities_dir, std::string* error);

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_USE_RUN_TABLES_H_
