// The publication workbook through libxlsxwriter, and the notes it carries.
// libxlsxwriter (1.1.4 in Debian 12) writes only to a named file, so the
// workbook is built in a private temporary folder, read back and put in
// place with WriteFileAtomically: the destination holds the old workbook or
// the whole new one, never a half-written zip.
#include <stdlib.h>
#include <xlsxwriter.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <string>
#include <system_error>
#include <vector>

#include "paritas/aggregation/normalisation.h"
#include "paritas/base/csv.h"
#include "paritas/base/read_limits.h"
#include "paritas/base/text.h"
#include "paritas/use/publication.h"

namespace paritas {
namespace {

namespace fs = std::filesystem;

// Widest column drawn, in characters (long names wrap no further).
constexpr double kMaxColumnWidth = 40.0;
// A workbook's file is read back up to this many bytes.
constexpr int64_t kMaxWorkbookBytes = int64_t{1} << 31;

// A number format of `decimals` digits after the point: "0", "0.0", "0.00"...
std::string NumberFormat(int decimals) {
  return decimals == 0 ? "0" : "0." + std::string(static_cast<size_t>(decimals), '0');
}

// Removes the temporary folder however the writing ends.
class TemporaryFolder {
 public:
  bool Create(std::string* error) {
    std::error_code ec;
    std::string pattern = (fs::temp_directory_path(ec) / "paritas-workbook-XXXXXX").string();
    if (::mkdtemp(pattern.data()) == nullptr) {
      *error = "cannot create a temporary folder '" + pattern + "'";
      return false;
    }
    path_ = pattern;
    return true;
  }
  ~TemporaryFolder() {
    std::error_code ec;
    if (!path_.empty()) fs::remove_all(path_, ec);
  }
  const std::string& path() const { return path_; }

 private:
  std::string path_;
};

struct Formats {
  lxw_format* bold = nullptr;
  lxw_format* number = nullptr;
};

lxw_error WriteTable(lxw_worksheet* sheet, const PublicationTable& table, const Formats& formats) {
  lxw_error status = worksheet_write_string(sheet, 0, 0, table.title.c_str(), formats.bold);
  const std::string note =
      "Rows: regions; columns: classification nodes. An empty cell: no figure.";
  if (status == LXW_NO_ERROR) status = worksheet_write_string(sheet, 1, 0, note.c_str(), nullptr);
  constexpr lxw_row_t kHeaderRow = 3;
  if (status == LXW_NO_ERROR)
    status = worksheet_write_string(sheet, kHeaderRow, 0, "region", formats.bold);
  if (status == LXW_NO_ERROR)
    status = worksheet_write_string(sheet, kHeaderRow, 1, "name", formats.bold);
  double name_width = 8.0;
  for (size_t c = 0; c < table.columns.size() && status == LXW_NO_ERROR; ++c) {
    status = worksheet_write_string(sheet, kHeaderRow, static_cast<lxw_col_t>(c + 2),
                                    table.columns[c].c_str(), formats.bold);
  }
  for (size_t r = 0; r < table.values.size() && status == LXW_NO_ERROR; ++r) {
    const lxw_row_t row = kHeaderRow + 1 + static_cast<lxw_row_t>(r);
    status = worksheet_write_string(sheet, row, 0, table.region_codes[r].c_str(), nullptr);
    if (status == LXW_NO_ERROR) {
      status = worksheet_write_string(sheet, row, 1, table.region_names[r].c_str(), nullptr);
    }
    name_width = std::max(name_width, static_cast<double>(table.region_names[r].size()));
    for (size_t c = 0; c < table.values[r].size() && status == LXW_NO_ERROR; ++c) {
      const double value = table.values[r][c];
      // An empty cell, not a zero: the region has no figure there.
      if (!std::isfinite(value)) continue;
      status =
          worksheet_write_number(sheet, row, static_cast<lxw_col_t>(c + 2), value, formats.number);
    }
  }
  if (status != LXW_NO_ERROR) return status;
  worksheet_set_column(sheet, 1, 1, std::min(name_width + 1.0, kMaxColumnWidth), nullptr);
  worksheet_set_column(sheet, 2, static_cast<lxw_col_t>(table.columns.size() + 1), 12.0, nullptr);
  // Region code and name stay in view while scrolling across nodes.
  worksheet_freeze_panes(sheet, kHeaderRow + 1, 2);
  return LXW_NO_ERROR;
}

lxw_error WriteNotes(lxw_worksheet* sheet, const std::vector<std::string>& notes,
                     const Formats& formats) {
  lxw_error status = worksheet_write_string(sheet, 0, 0, "Notes", formats.bold);
  for (size_t k = 0; k < notes.size() && status == LXW_NO_ERROR; ++k) {
    if (notes[k].empty()) continue;
    status =
        worksheet_write_string(sheet, static_cast<lxw_row_t>(k + 2), 0, notes[k].c_str(), nullptr);
  }
  worksheet_set_column(sheet, 0, 0, 120.0, nullptr);
  return status;
}

}  // namespace

bool WritePublicationWorkbook(const std::string& path, const std::vector<PublicationTable>& tables,
                              const std::vector<std::string>& notes, int decimals,
                              std::string* error) {
  for (const PublicationTable& table : tables) {
    // A worksheet holds at most LXW_COL_MAX columns and LXW_ROW_MAX rows.
    if (table.columns.size() + 2 > LXW_COL_MAX || table.values.size() + 5 > LXW_ROW_MAX) {
      *error = path + ": the table '" + table.sheet + "' has " +
               std::to_string(table.columns.size() + 2) + " columns and " +
               std::to_string(table.values.size() + 4) + " rows, more than a worksheet holds (" +
               std::to_string(LXW_COL_MAX) + " x " + std::to_string(LXW_ROW_MAX) +
               "); publish fewer nodes (--depth) or without intervals (--no-intervals)";
      return false;
    }
  }
  TemporaryFolder folder;
  if (!folder.Create(error)) {
    *error = path + ": " + *error;
    return false;
  }
  const std::string staged = (fs::path(folder.path()) / "publication.xlsx").string();
  lxw_workbook_options options = {};
  options.tmpdir = const_cast<char*>(folder.path().c_str());
  lxw_workbook* workbook = workbook_new_opt(staged.c_str(), &options);
  if (workbook == nullptr) {
    *error = path + ": cannot start the workbook";
    return false;
  }
  Formats formats;
  formats.bold = workbook_add_format(workbook);
  format_set_bold(formats.bold);
  formats.number = workbook_add_format(workbook);
  format_set_num_format(formats.number, NumberFormat(decimals).c_str());
  lxw_error status = LXW_NO_ERROR;
  for (const PublicationTable& table : tables) {
    lxw_worksheet* sheet = workbook_add_worksheet(workbook, table.sheet.c_str());
    status =
        sheet == nullptr ? LXW_ERROR_NULL_PARAMETER_IGNORED : WriteTable(sheet, table, formats);
    if (status != LXW_NO_ERROR) break;
  }
  if (status == LXW_NO_ERROR) {
    lxw_worksheet* sheet = workbook_add_worksheet(workbook, "Notes");
    status =
        sheet == nullptr ? LXW_ERROR_NULL_PARAMETER_IGNORED : WriteNotes(sheet, notes, formats);
  }
  // workbook_close writes the file and frees the workbook whatever happened.
  const lxw_error closed = workbook_close(workbook);
  if (status == LXW_NO_ERROR) status = closed;
  if (status != LXW_NO_ERROR) {
    *error = path + ": cannot write the workbook: " + lxw_strerror(status);
    return false;
  }
  std::string contents;
  if (!ReadWholeFile(staged, kMaxWorkbookBytes, LimitAdvice("the workbook size"), &contents,
                     error)) {
    *error = path + ": " + *error;
    return false;
  }
  return WriteFileAtomically(path, contents, error);
}

std::vector<std::string> PublicationNotes::Lines(int decimals, PublicationOrder order) const {
  std::vector<std::string> lines = {
      "What the tables show",
      "Price levels: price level index of each region at each classification node, reference "
      "= 100 (see Reference below). A level of 110 means prices 10 % above the reference.",
      "Real per head: real expenditure per head (expenditure divided by the price level, then "
      "by population) as an index, country = 100; present when the survey gives populations.",
      "Figures are rounded to " + std::to_string(decimals) + " decimal" +
          (decimals == 1 ? "" : "s") + "; regions are sorted by " +
          (order == PublicationOrder::kCode
               ? std::string("code")
               : std::string("price level at the root, dearest first")) +
          ".",
      "",
      "Methods",
      "Cell prices: geometric mean of the quotes of each item in each region.",
      "Basic heading parities: " + elementary + "; aggregation above the basic headings: " +
          aggregation + " (see README.md of paritas for the formulas and their sources).",
      "Reference: " + ReferenceConvention(reference) + ".",
  };
  if (!interval.empty()) {
    lines.push_back("Intervals (columns 'lower' and 'upper'): " + interval +
                    "; they reflect the sampling of items only, not of outlets or of the "
                    "expenditure weights.");
  }
  std::vector<std::string> cautions = {
      "",
      "Cautions",
      "Sampling error: the parities rest on a sample of items and outlets; differences of a few "
      "index points between regions may lie within sampling error.",
      "Item comparability: items priced in several regions are taken to be the same product; "
      "differences in quality or outlet type show up as price differences.",
      "Formula choice: another elementary or aggregation method gives somewhat different levels; "
      "the tables show one choice.",
      "Official figures: regional price levels published by the statistical authority are the "
      "official figures; these tables are an analysis and do not replace them.",
      "",
      "Sources",
  };
  if (!extrapolation.empty()) {
    cautions.insert(cautions.begin() + 2, "Extrapolated: " + extrapolation + ".");
  }
  lines.insert(lines.end(), cautions.begin(), cautions.end());
  for (const std::string& source : sources) lines.push_back(source);
  lines.push_back("");
  lines.push_back("Run id: " + run_id + " (run.json of the compute output folder)");
  lines.push_back("Computed with paritas " + tool_version + ".");
  return lines;
}

}  // namespace paritas
