// The run-folder table readers of run_tables.h: a table is read whole (the
// files are small: one row per node and region) and checked field by field.
#include "use/run_tables.h"

#include <algorithm>
#include <filesystem>
#include <limits>
#include <map>
#include <nlohmann/json.hpp>

#include "base/magnitude.h"
#include "base/not_a_number.h"
#include "base/sha256.h"
#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "paritas/output/run_record.h"

namespace paritas::internal {
namespace {

using Json = nlohmann::json;

// Parses a table already read whole from `path` (ReadTable's rows).
bool ParseTable(const std::string& path, const std::string& contents, const ReadLimits& limits,
                const std::vector<std::string>& wanted, const std::vector<bool>& required,
                const std::function<bool(const TableRow&, std::string*)>& handle,
                std::string* error);

}  // namespace

// Lists header names for a message: a header of garbage can hold millions,
// so only the first 20 are named.
std::string ListedNames(const std::vector<std::string>& names) {
  constexpr size_t kMaxListed = 20;
  if (names.size() <= kMaxListed) return JoinNames(names);
  return JoinNames(std::vector<std::string>(names.begin(), names.begin() + kMaxListed)) +
         ", ... (" + std::to_string(names.size()) + " columns)";
}

// Reads a CSV table whole, up to limits.max_file_bytes, and hands each data
// row to `handle`, which returns false with a message to stop. Returns
// false with a message naming the file.
bool ReadTable(const std::string& path, const ReadLimits& limits,
               const std::vector<std::string>& wanted, const std::vector<bool>& required,
               const std::function<bool(const TableRow&, std::string*)>& handle,
               std::string* error) {
  std::string contents;
  return ReadWholeFile(path, limits.max_file_bytes, LimitAdvice("limits.max_file_bytes"), &contents,
                       error) &&
         ParseTable(path, contents, limits, wanted, required, handle, error);
}

bool ReadRunTable(const std::string& dir, const std::string& relative, const ReadLimits& limits,
                  const std::vector<std::string>& wanted, const std::vector<bool>& required,
                  const std::function<bool(const TableRow&, std::string*)>& handle,
                  std::string* error, const std::string& expected_run_id) {
  const std::string path = (std::filesystem::path(dir) / relative).string();
  std::string contents;
  return ReadWholeFile(path, limits.max_file_bytes, LimitAdvice("limits.max_file_bytes"), &contents,
                       error) &&
         MatchesRunRecord(dir, relative, contents, error, expected_run_id) &&
         ParseTable(path, contents, limits, wanted, required, handle, error);
}

namespace {

// The SHA-256 run.json's "outputs" records per path (entries of a path and
// its digest, as compute writes them since schema 2; run.json's own entry
// has no digest); empty when the record has none (a record of schema 1
// lists names only). False with `problem` for an entry that is neither a
// name nor a path with an optional digest.
bool RecordedDigests(const Json& outputs, std::map<std::string, std::string>* digests,
                     std::string* problem) {
  if (!outputs.is_array()) return true;
  for (size_t k = 0; k < outputs.size(); ++k) {
    const Json& file = outputs[k];
    if (file.is_string()) continue;  // a name without a digest
    const Json path = file.is_object() ? file.value("path", Json()) : Json();
    const Json sha256 = file.is_object() ? file.value("sha256", Json("")) : Json();
    if (!path.is_string() || !sha256.is_string()) {
      *problem =
          "its \"outputs\" entry " + std::to_string(k + 1) + " is not a file's path and SHA-256";
      return false;
    }
    if (!sha256.get<std::string>().empty()) {
      (*digests)[path.get<std::string>()] = sha256.get<std::string>();
    }
  }
  return true;
}

}  // namespace

bool ReadRunTableAt(const std::string& path, const ReadLimits& limits,
                    const std::vector<std::string>& wanted, const std::vector<bool>& required,
                    const std::function<bool(const TableRow&, std::string*)>& handle,
                    std::string* error) {
  const std::filesystem::path file(path);
  return ReadRunTable(file.parent_path().string(), file.filename().string(), limits, wanted,
                      required, handle, error);
}

bool MatchesRunRecord(const std::string& dir, const std::string& relative,
                      std::string_view contents, std::string* error,
                      const std::string& expected_run_id) {
  namespace fs = std::filesystem;
  const fs::path record_path = fs::path(dir) / "run.json";
  std::error_code ec;
  if (!fs::exists(record_path, ec)) return true;  // a folder made by hand
  const std::string file_path = (fs::path(dir) / relative).string();
  std::string run_id, json, problem;
  if (!ReadRunRecord(dir, &run_id, &json, error)) {
    *error = "cannot check " + file_path + " against its run's record: " + *error;
    return false;
  }
  if (!expected_run_id.empty() && run_id != expected_run_id) {
    *error = file_path + ": the run folder was replaced while it was read (" +
             record_path.string() + " now records run " + QuoteValue(run_id) + ", not " +
             QuoteValue(expected_run_id) + "); read it again";
    return false;
  }
  std::map<std::string, std::string> digests;
  const Json record = Json::parse(json, nullptr, /*allow_exceptions=*/false);
  if (!RecordedDigests(record.value("outputs", Json::array()), &digests, &problem)) {
    *error = "cannot check " + file_path + " against its run's record: " + record_path.string() +
             ": " + problem;
    return false;
  }
  if (digests.empty()) return true;  // a record without digests: read as it is
  const auto recorded = digests.find(relative);
  if (recorded == digests.end()) {
    *error = file_path + ": not among the files " + record_path.string() +
             " records, so not a file of that run; a run folder holds only what its run wrote: "
             "run the command that wrote the folder again, or restore the folder whole";
    return false;
  }
  const std::string now = Sha256Hex(contents);
  if (now == recorded->second) return true;
  *error = file_path + ": not the file its run wrote (" + record_path.string() +
           " records SHA-256 " + recorded->second.substr(0, 12) + "..., the file has " +
           now.substr(0, 12) +
           "...): it was changed or replaced after the run, so its figures "
           "are not that run's; run the command that wrote the folder again, or restore the "
           "folder whole";
  return false;
}

namespace {

bool ParseTable(const std::string& path, const std::string& contents, const ReadLimits& limits,
                const std::vector<std::string>& wanted, const std::vector<bool>& required,
                const std::function<bool(const TableRow&, std::string*)>& handle,
                std::string* error) {
  CsvReader reader(contents);
  reader.set_limits(limits);
  CsvRecord record;
  if (!reader.Next(&record)) {
    *error = reader.error().empty() ? path + ": file is empty (expected a header row)"
                                    : path + ":" + reader.error();
    return false;
  }
  int64_t bad_line = 0;
  int bad_field = 0;
  if (FindInvalidUtf8(record, ',', &bad_line, &bad_field)) {
    *error = LocatedMessage(path, bad_line, bad_field,
                            Utf8Problem("column name", record.fields[bad_field - 1]));
    return false;
  }
  if (FindMisplacedByteOrderMark(record, &bad_field)) {
    *error = LocatedMessage(path, record.line, bad_field,
                            MisplacedByteOrderMarkProblem(record.fields[bad_field - 1]));
    return false;
  }
  const CsvHeader header(record.fields);
  const size_t num_fields = record.fields.size();
  TableRow row;
  row.columns.assign(wanted.size(), 0);
  for (size_t k = 0; k < wanted.size(); ++k) {
    row.columns[k] = header.Find(wanted[k]) + 1;
    if (required[k] && row.columns[k] == 0) {
      *error = path + ":" + std::to_string(record.line) + ": missing column '" + wanted[k] +
               "' (found: " + ListedNames(header.names()) + ")";
      return false;
    }
  }
  row.fields.resize(wanted.size());
  while (reader.Next(&record)) {
    const size_t found = record.fields.size();
    if (found != num_fields) {
      // The column is the first field missing, or the first one too many.
      *error =
          LocatedMessage(path, record.line, static_cast<int>(std::min(found, num_fields)) + 1,
                         "row has " + std::to_string(found) + " field" + (found == 1 ? "" : "s") +
                             ", the header has " + std::to_string(num_fields));
      return false;
    }
    row.line = record.line;
    for (size_t k = 0; k < wanted.size(); ++k) {
      row.fields[k] = row.columns[k] > 0 ? Trim(record.fields[row.columns[k] - 1]) : "";
      if (FindInvalidUtf8(row.fields[k]) != std::string_view::npos) {
        *error = LocatedMessage(path, record.line, row.columns[k],
                                Utf8Problem(wanted[k], row.fields[k]));
        return false;
      }
    }
    if (!handle(row, error)) return false;
  }
  if (!reader.error().empty()) {
    *error = path + ":" + reader.error();
    return false;
  }
  return true;
}

constexpr std::string_view kWrittenByCompute = "compute writes none beyond it; is the file as it wrote it?";

// What to do with a figure out of `range`: input figures (price indices)
// are rescaled; figures a run wrote are not beyond what it writes.
std::string_view AdviceFor(const FigureRange& range) {
  return range.largest == kInputRange.largest ? "only ratios between regions matter, so rescale them"
                                              : kWrittenByCompute;
}

}  // namespace

// Parses an optional positive number of a parities table: empty = NaN.
bool ParseParity(const std::string& path, int64_t line, int column, const char* what,
                 std::string_view text, double* value, std::string* error, const FigureRange& range) {
  *value = kNaN;
  if (text.empty()) return true;
  double parsed = 0.0;
  const NumberStatus status = ParseNumber(text, &parsed);
  if (status != NumberStatus::kOk) {
    *error = LocatedMessage(path, line, column, NumberProblem(status, what, text));
    return false;
  }
  if (!(parsed > 0)) {
    *error = LocatedMessage(path, line, column,
                            std::string(what) + " " + QuoteValue(text) + " is not positive");
    return false;
  }
  if (std::string problem = MagnitudeProblem(what, text, parsed, AdviceFor(range), range); !problem.empty()) {
    *error = LocatedMessage(path, line, column, problem);
    return false;
  }
  *value = parsed;
  return true;
}

bool ParseNonNegative(const std::string& path, int64_t line, int column, const char* what,
                      std::string_view text, double* value, std::string* error, const FigureRange& range) {
  *value = kNaN;
  if (text.empty()) return true;
  double parsed = 0.0;
  const NumberStatus status = ParseNumber(text, &parsed);
  std::string problem;
  if (status != NumberStatus::kOk) {
    problem = NumberProblem(status, what, text);
  } else if (parsed < 0) {
    problem = std::string(what) + " " + QuoteValue(text) + " is negative";
  } else {
    problem = MagnitudeProblem(what, text, parsed, kWrittenByCompute, range);
  }
  if (!problem.empty()) {
    *error = LocatedMessage(path, line, column, problem);
    return false;
  }
  *value = parsed;
  return true;
}

bool ParseIntervalBounds(const std::string& path, const TableRow& row, int lower, int upper,
                         double* lower_value, double* upper_value, std::string* error) {
  const std::string_view lower_text = row.fields[lower], upper_text = row.fields[upper];
  if (!ParseParity(path, row.line, row.columns[lower], "lower", lower_text, lower_value, error) ||
      !ParseParity(path, row.line, row.columns[upper], "upper", upper_text, upper_value, error)) {
    return false;
  }
  // One bound alone gave a real interval not holding the real value (min
  // and max of a number and NaN return the first).
  const bool one = std::isnan(*lower_value) != std::isnan(*upper_value);
  if (!one && !(*lower_value > *upper_value)) return true;
  *error = LocatedMessage(path, row.line, row.columns[lower],
                          (one ? "one bound of the interval is empty (lower " + QuoteValue(lower_text) +
                                     ", upper " + QuoteValue(upper_text) + ")"
                               : "lower " + QuoteValue(lower_text) + " is above upper " + QuoteValue(upper_text)) +
                              "; is the file as sensitivity wrote it?");
  return false;
}

// The command that writes the intervals deflate reads: sensitivity writes
// under its --output, which need not be the configuration's `output`.
std::string SensitivityAdvice(const std::string& parities_dir) {
  std::string run_id, json, error, config = "CONFIG";
  if (ReadRunRecord(parities_dir, &run_id, &json, &error) && !RunConfigPath(json).empty()) {
    config = RunConfigPath(json);
  }
  return "run 'paritas sensitivity " + config + " --output " + parities_dir +
         "' with the configuration and options of the compute run";
}

// The intervals must come from a sensitivity run on the same inputs and
// settings as the parities beside them (run.json of each); otherwise a real
// value would be bracketed by the interval of another comparison.
bool SameRunSettings(const std::string& parities_dir, std::string* error) {
  const std::string sensitivity_dir =
      (std::filesystem::path(parities_dir) / "sensitivity").string();
  std::string compute_id, compute_json, sensitivity_id, sensitivity_json;
  if (!ReadRunRecord(parities_dir, &compute_id, &compute_json, error) ||
      !ReadRunRecord(sensitivity_dir, &sensitivity_id, &sensitivity_json, error)) {
    *error = "cannot tell whether the intervals belong to these parities: " + *error;
    return false;
  }
  const std::vector<std::string> differences = RunDifferences(compute_json, sensitivity_json);
  if (differences.empty()) return true;
  *error = "the intervals in " + sensitivity_dir +
           " come from a sensitivity run on other inputs or settings " + "than the parities in " +
           parities_dir + " (\"this run\" = the parities): " + JoinNames(differences, "; ") + "; " +
           SensitivityAdvice(parities_dir);
  return false;
}

}  // namespace paritas::internal
