// Publication tables of a finished run: wide tables of regions x nodes
// (price level indices; real expenditure per head where the survey has
// populations; optionally the bootstrap interval of each price level),
// rounded to a set number of decimals, written as CSV and as a spreadsheet
// workbook with a notes sheet.
//
// A command of its own (`paritas publish RUN_FOLDER`), not part of compute:
// it reads a compute output folder as deflate does, so the tables can be
// redone with other decimals or order without recomputing, they pick up
// sensitivity intervals computed after the parities, and the run folder,
// which compute replaces whole, never holds files compute did not write.
// Region names and the tree come from the configuration the run record
// names, checked against the run (same regions file by SHA-256, same nodes).
#ifndef PARITAS_USE_PUBLICATION_H_
#define PARITAS_USE_PUBLICATION_H_

#include <string>
#include <vector>

#include "paritas/base/read_limits.h"

namespace paritas {

// Order of the regions (rows) of every table.
enum class PublicationOrder {
  kCode,   // by region code, byte order ("code")
  kLevel,  // by the root's price level, dearest first; regions without one last ("level")
};
std::string ToString(PublicationOrder order);
// Case-insensitive; false for other text.
bool FromString(const std::string& text, PublicationOrder* order);
std::vector<std::string> PublicationOrderNames();

struct PublishOptions {
  // Output folder of `paritas compute` (holds run.json and parities.csv).
  // Required.
  std::string run_dir;
  // CSV of the price level table; empty = none. When the run has
  // populations, the real-per-head table goes beside it, ".csv" replaced by
  // "_real_per_head.csv" (RealPerHeadCsvPath). At least one of csv_path and
  // xlsx_path is required; neither may be an input nor lie inside run_dir
  // (compute replaces that folder whole).
  std::string csv_path;
  // Workbook (.xlsx) with one sheet per table and a notes sheet; empty = none.
  std::string xlsx_path;
  // Configuration of the run, for region names and the tree; empty
  // (default) = configuration.config_path of run.json, as written there
  // (relative paths are relative to the working directory of the compute).
  std::string config_path;
  // Digits after the point of every published figure, 0 to 6. Default 1, as
  // price level indices (reference = 100) are customarily published.
  int decimals = 1;
  PublicationOrder order = PublicationOrder::kCode;
  // Nodes down to this depth below the root (0 = the root only); -1
  // (default) = every node. Columns follow the classification order.
  int max_depth = -1;
  // Adds the columns "<node> lower" and "<node> upper" to the price level
  // table from <run_dir>/sensitivity/bootstrap.csv when that file exists
  // (default true). A sensitivity run on other inputs or settings is refused.
  bool intervals = true;
  // Limits on the files read (parities.csv, bootstrap.csv, regions file).
  ReadLimits limits;

  bool IsValid(std::string* error) const;
};

// The path of the real-per-head table beside a price level CSV.
std::string RealPerHeadCsvPath(const std::string& csv_path);

// One published table: rows are regions, columns nodes.
struct PublicationTable {
  // Sheet name ("Price levels", "Real per head").
  std::string sheet;
  // First line of the sheet, e.g. "Price level indices (reference: mean = 100)".
  std::string title;
  // Column headers after "region" and "name": node codes, with " lower" /
  // " upper" for interval columns.
  std::vector<std::string> columns;
  // Region codes and names (name = code when the survey gives none), in
  // the order chosen.
  std::vector<std::string> region_codes;
  std::vector<std::string> region_names;
  // values[row][column], rounded to the decimals; NaN = no figure (empty cell).
  std::vector<std::vector<double>> values;
};

// What the tables rest on, for the notes sheet.
struct PublicationNotes {
  std::string run_id;
  std::string reference;
  std::string elementary;
  std::string aggregation;
  std::string tool_version;
  // "role: path (sha256 ...)" per input file of the run.
  std::vector<std::string> sources;
  // Interval sentence when intervals are shown ("95 % bootstrap interval,
  // 500 replicates, sensitivity run <id>"), empty otherwise.
  std::string interval;
  // A run of `paritas carry`: run.json's caution (the parities are carried
  // from a benchmark by price indices), the first of the cautions; and the
  // period, named in every table's title. Both empty for a compute run.
  std::string extrapolation;
  std::string extrapolated_to;
  // Every line of the notes sheet, in order (methods, reference, cautions,
  // sources, run id).
  std::vector<std::string> Lines(int decimals, PublicationOrder order) const;
};

enum class PublishOutcome {
  kNotRun,
  kOk,
  kInvalidInput,  // options, run folder or its inputs invalid, or a file unwritable
};

struct PublishSummary {
  PublishOutcome outcome = PublishOutcome::kNotRun;
  std::string message = "not run";
  std::string run_id;
  int num_regions = 0;
  int num_nodes_given = 0;  // nodes in parities.csv
  int num_nodes_used = 0;   // nodes published (max_depth)
  bool has_real_per_head = false;
  bool has_intervals = false;
  // Files written, in order.
  std::vector<std::string> files_written;
  // The tables and notes as written (tests read them).
  std::vector<PublicationTable> tables;
  PublicationNotes notes;

  // One line: "published 16 regions x 40 nodes of run 1a2b...: 2 tables".
  std::string BriefReport() const;
};

// Returns a table as CSV: header "region,name,<columns>", values with
// exactly `decimals` digits, empty where NaN.
std::string PublicationCsv(const PublicationTable& table, int decimals);

// Writes the workbook: one sheet per table (title in row 1, a note in row 2,
// headers in row 4, data from row 5; numbers stored as numbers with the
// format "0.0..." of `decimals` digits) and a sheet "Notes". Written whole
// under a temporary name and renamed into place. False with a message naming
// the path on failure.
bool WritePublicationWorkbook(const std::string& path, const std::vector<PublicationTable>& tables,
                              const std::vector<std::string>& notes, int decimals,
                              std::string* error);

// Reads the run, builds the tables and writes the files asked for. Resets
// `summary`; returns true when every file was written. Never aborts on bad
// data; nothing is written when anything read is invalid.
bool Publish(const PublishOptions& options, PublishSummary* summary);

}  // namespace paritas

#endif  // PARITAS_USE_PUBLICATION_H_
