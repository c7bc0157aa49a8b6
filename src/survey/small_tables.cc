// The small survey tables (regions.csv, items.csv, expenditure.csv), each
// read whole and row by row, and the header and code checks that prices.csv
// shares with them.
#include <algorithm>
#include <cmath>
#include <functional>
#include <limits>
#include <string>
#include <unordered_map>
#include <unordered_set>
#include <vector>

#include "base/magnitude.h"
#include "base/sha256.h"
#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "survey/loader_state.h"

namespace paritas::internal {
namespace {

constexpr size_t kMaxCodeLength = 200;

// What became of a data row: used (empty reason), or rejected for `reason`
// at `column` (1-based; 0 = the row as a whole).
struct RowVerdict {
  int column = 0;
  std::string reason;
  RejectionCause cause = RejectionCause::kRow;
};

// Called with each rejected row and its problem (without the location).
using RejectHook = std::function<void(const CsvRecord&, const Columns&, const std::string&)>;

// The trimmed field of `column` (-1: absent) when the record has it and it
// is a valid code in valid UTF-8, else empty.
std::string_view ValidCodeField(const CsvRecord& record, int column) {
  if (column < 0 || static_cast<size_t>(column) >= record.fields.size()) return {};
  const std::string_view code = Trim(record.fields[column]);
  if (!CheckCode(code, "code").empty() || FindInvalidUtf8(code) != std::string_view::npos) {
    return {};
  }
  return code;
}

// The first line of each (region, heading) pair of expenditure.csv or the
// external parities. The pairs of the regions and headings known when the
// file is opened (all of them, usually: the prices come first) are kept in
// a dense grid, which a
// file in any order touches within a few hundred kilobytes; others in a
// map. A node-based map of every pair took most of the file's 18 ms for
// 100,000 rows on one core, the other idle, and an open-addressed one 14 ms
// (a cache miss per row).
class FirstLines {
 public:
  FirstLines(int num_regions, int num_headings) {
    // One row for the national basket (region -1), one per region; at most
    // 4 M pairs (32 MB), beyond which the map takes them all.
    const int64_t rows = static_cast<int64_t>(num_regions) + 1;
    if (num_headings > 0 && rows * num_headings <= (int64_t{1} << 22)) {
      rows_ = rows;
      columns_ = num_headings;
      grid_.assign(static_cast<size_t>(rows * num_headings), 0);
    }
  }

  // Returns {the line of the pair's first row, whether this row is it}.
  std::pair<int64_t, bool> Add(int region, int heading, int64_t line) {
    const int64_t row = static_cast<int64_t>(region) + 1;
    if (row < rows_ && heading < columns_) {
      int64_t& first = grid_[static_cast<size_t>(row * columns_ + heading)];  // lines count from 1
      if (first > 0) return {first, false};
      first = line;
      return {line, true};
    }
    const uint64_t key = (static_cast<uint64_t>(static_cast<uint32_t>(region)) << 32) | static_cast<uint32_t>(heading);
    const auto [it, inserted] = others_.emplace(key, line);
    return {it->second, inserted};
  }

 private:
  int64_t rows_ = 0;
  int64_t columns_ = 0;
  std::vector<int64_t> grid_;
  std::unordered_map<uint64_t, int64_t> others_;
};

// Reads a small table whole: checks its header, then hands every data row
// with the header's number of fields to `handle`, counting rows read, used
// and rejected.
bool ReadSmallTable(const std::string& path, const ReadLimits& limits, const CsvFormat& format,
                    const std::vector<std::string>& wanted, const std::vector<bool>& required,
                    Rejections* rejections, InputFileSummary* file,
                    const std::function<RowVerdict(const CsvRecord&, const Columns&)>& handle,
                    const RejectHook& on_reject, std::string* error) {
  std::string text;
  if (!ReadWholeFile(path, limits.max_file_bytes, LimitAdvice("limits.max_file_bytes"), &text,
                     error)) {
    return false;
  }
  file->size_bytes = static_cast<int64_t>(text.size());
  file->sha256 = Sha256Hex(text);
  CsvReader reader(text);
  reader.set_limits(limits);
  reader.set_delimiter(format.delimiter);
  Columns columns;
  if (!ReadHeader(&reader, path, format.delimiter, wanted, required, &columns, file, error)) {
    return false;
  }
  CsvRecord record;
  while (reader.Next(&record)) {
    ++file->rows_read;
    RowVerdict verdict;
    int64_t line = record.line;
    if (RowUtf8Problem(record, format.delimiter, columns.names, &line, &verdict.column,
                       &verdict.reason)) {
      // Checked first: text in another encoding can break any later rule.
    } else if (static_cast<int>(record.fields.size()) != columns.num_fields) {
      verdict = {FieldCountColumn(record.fields.size(), columns.num_fields),
                 FieldCountProblem(record.fields.size(), columns.num_fields)};
    } else {
      verdict = handle(record, columns);
    }
    if (verdict.reason.empty()) {
      ++file->rows_used;
      continue;
    }
    if (on_reject) on_reject(record, columns, verdict.reason);
    RejectedRow row{path, record.line, LocatedMessage(path, line, verdict.column, verdict.reason),
                    std::string(record.raw)};
    row.cause = verdict.cause;
    rejections->Add(std::move(row), file);
  }
  if (!reader.error().empty()) {
    *error = path + ":" + reader.error();
    return false;
  }
  return true;
}

}  // namespace

// Reads the header row, checks required and duplicated columns, and records
// the ignored ones.
bool ReadHeader(CsvReader* reader, const std::string& path, char delimiter,
                const std::vector<std::string>& wanted, const std::vector<bool>& required,
                Columns* columns, InputFileSummary* file, std::string* error) {
  CsvRecord header;
  if (!reader->Next(&header)) {
    if (!reader->error().empty()) {
      *error = path + ":" + reader->error();
    } else {
      std::vector<std::string> names;
      for (size_t i = 0; i < wanted.size(); ++i) {
        if (required[i]) names.push_back(wanted[i]);
      }
      *error =
          path + ": file is empty (expected a header row with columns " + JoinNames(names) + ")";
    }
    return false;
  }
  int64_t bad_line = 0;
  int bad_field = 0;
  if (FindInvalidUtf8(header, delimiter, &bad_line, &bad_field)) {
    *error = LocatedMessage(path, bad_line, bad_field,
                            Utf8Problem("column name", header.fields[bad_field - 1]));
    return false;
  }
  if (FindMisplacedByteOrderMark(header, &bad_field)) {
    *error = LocatedMessage(path, header.line, bad_field,
                            MisplacedByteOrderMarkProblem(header.fields[bad_field - 1]));
    return false;
  }
  CsvHeader names(header.fields);
  columns->num_fields = static_cast<int>(header.fields.size());
  columns->names = names.names();
  columns->index.assign(wanted.size(), -1);
  for (size_t i = 0; i < wanted.size(); ++i) {
    columns->index[i] = names.Find(wanted[i]);
    for (const std::string& duplicate : names.duplicates()) {
      if (duplicate == wanted[i]) {
        *error = path + ":" + std::to_string(header.line) + ": column '" + wanted[i] +
                 "' appears more than once";
        return false;
      }
    }
    if (required[i] && columns->index[i] < 0) {
      // A header of garbage can hold a million names: list the first few.
      constexpr size_t kMaxListed = 20;
      const std::vector<std::string>& all = names.names();
      std::string found;
      if (all.size() <= kMaxListed) {
        found = JoinNames(all);
      } else {
        found = JoinNames(std::vector<std::string>(all.begin(), all.begin() + kMaxListed)) +
                ", ... (" + std::to_string(all.size()) + " columns)";
      }
      *error = path + ":" + std::to_string(header.line) + ": missing column '" + wanted[i] +
               "' (found: " + found + ")";
      return false;
    }
  }
  // A set, so that a header with a million columns is read in linear time.
  std::unordered_set<std::string_view> ignored;
  ignored.reserve(names.names().size());
  for (const std::string& name : names.names()) {
    if (std::find(wanted.begin(), wanted.end(), name) == wanted.end() &&
        ignored.insert(name).second) {
      file->ignored_columns.push_back(name);
    }
  }
  return true;
}

bool RowUtf8Problem(const CsvRecord& record, char delimiter, const std::vector<std::string>& names,
                    int64_t* line, int* column, std::string* problem) {
  if (!FindInvalidUtf8(record, delimiter, line, column)) return false;
  const size_t k = static_cast<size_t>(*column - 1);
  const std::string_view field = k < record.fields.size() ? record.fields[k] : record.raw;
  *problem = Utf8Problem(k < names.size() ? std::string_view(names[k]) : "field", field);
  return true;
}

// Checks a code field; returns an empty string when valid, else the reason.
std::string CheckCode(std::string_view code, const char* what) {
  if (code.empty()) return std::string(what) + " is empty";
  if (code.size() > kMaxCodeLength) {
    return std::string(what) + " " + QuoteValue(code) + " is longer than " +
           std::to_string(kMaxCodeLength) + " characters";
  }
  return "";
}

int FieldCountColumn(size_t found, int expected) {
  return found < static_cast<size_t>(expected) ? static_cast<int>(found) + 1 : expected + 1;
}

std::string FieldCountProblem(size_t found, int expected) {
  return "row has " + std::to_string(found) + " field" + (found == 1 ? "" : "s") +
         ", the header has " + std::to_string(expected);
}

void RejectedCodeCollector::Note(std::string_view code, int64_t line, const std::string& reason) {
  if (code.empty()) return;
  const auto [it, inserted] = index_.emplace(code, static_cast<int>(first_.size()));
  if (!inserted) return;
  RejectedCode rejected;
  rejected.kind = kind_;
  rejected.code = std::string(code);
  rejected.file = path_;
  rejected.line = line;
  rejected.reason = reason;
  first_.push_back(std::move(rejected));
}

void RejectedCodeCollector::Finish(const CodeTable& accepted, LoadState* state) {
  auto& index = std::string_view(kind_) == "region" ? state->rejected_region_index
                                                    : state->rejected_item_index;
  for (RejectedCode& code : first_) {
    if (accepted.Find(code.code) >= 0) continue;  // a later row of the code was used
    index.emplace(code.code, static_cast<int>(state->rejected_codes.size()));
    state->rejected_codes.push_back(std::move(code));
  }
}

std::string RejectedCodeReason(const RejectedCode& code) {
  return code.kind + " " + QuoteValue(code.code) + " was rejected at " + code.file + ":" +
         std::to_string(code.line);
}

// ---------------------------------------------------------------------------
// regions.csv and items.csv

bool ReadRegions(const std::string& path, LoadState* state, Rejections* rejections,
                 InputFileSummary* file, std::string* error) {
  std::unordered_map<std::string, int64_t> first_line;
  auto handle = [&](const CsvRecord& record, const Columns& columns) -> RowVerdict {
    const int kRegion = columns.index[0], kName = columns.index[1], kPopulation = columns.index[2];
    const std::string_view code = Trim(record.fields[kRegion]);
    if (std::string problem = CheckCode(code, "region"); !problem.empty()) {
      return {kRegion + 1, problem};
    }
    double population = std::nan("");
    if (kPopulation >= 0) {
      const std::string_view value = record.fields[kPopulation];
      const char decimal = state->config->survey.regions_format.decimal;
      const NumberStatus status = ParseNumber(value, &population, decimal);
      if (status != NumberStatus::kOk && status != NumberStatus::kEmpty) {
        return {kPopulation + 1,
                NumberProblem(status, "population", value, decimal, "survey.regions")};
      }
      if (status == NumberStatus::kEmpty) population = std::nan("");
      if (population < 0) {
        return {kPopulation + 1, "population " + QuoteValue(value) + " is negative"};
      }
      if (std::string problem = MagnitudeProblem("population", value, population); !problem.empty()) {
        return {kPopulation + 1, problem};
      }
    }
    auto [it, inserted] = first_line.emplace(std::string(code), record.line);
    if (!inserted) {
      return {kRegion + 1, "region " + QuoteValue(code) + " is listed twice (first at line " +
                               std::to_string(it->second) + ")"};
    }
    state->regions.Intern(code);
    state->region_name.emplace_back(kName >= 0 ? Trim(record.fields[kName]) : std::string_view());
    state->region_population.push_back(population);
    return {};
  };
  RejectedCodeCollector rejected("region", path);
  const auto on_reject = [&](const CsvRecord& record, const Columns& columns,
                             const std::string& reason) {
    rejected.Note(ValidCodeField(record, columns.index[0]), record.line, reason);
  };
  if (!ReadSmallTable(path, state->config->limits, state->config->survey.regions_format,
                      {"region", "name", "population"}, {true, false, false}, rejections, file,
                      handle, on_reject, error))
    return false;
  rejected.Finish(state->regions, state);
  state->regions_fixed = true;
  return true;
}

bool ReadItems(const std::string& path, LoadState* state, Rejections* rejections,
               InputFileSummary* file, std::string* error) {
  auto handle = [&](const CsvRecord& record, const Columns& columns) -> RowVerdict {
    const int kItem = columns.index[0], kHeading = columns.index[1];
    const int kDescription = columns.index[2], kUnit = columns.index[3];
    const int kReference = columns.index[4];
    const std::string_view item = Trim(record.fields[kItem]);
    const std::string_view heading = Trim(record.fields[kHeading]);
    if (std::string problem = CheckCode(item, "item"); !problem.empty()) {
      return {kItem + 1, problem};
    }
    if (std::string problem = CheckCode(heading, "heading"); !problem.empty()) {
      return {kHeading + 1, problem};
    }
    int heading_index = state->headings.Find(heading);
    if (heading_index < 0) {
      if (state->headings_fixed) {
        return {kHeading + 1, "heading " + QuoteValue(heading) + " is not in the classification"};
      }
      heading_index = state->headings.Intern(heading);
    }
    double reference = std::numeric_limits<double>::quiet_NaN();
    if (kReference >= 0 && !Trim(record.fields[kReference]).empty()) {
      const std::string_view text = record.fields[kReference];
      const char decimal = state->config->survey.items_format.decimal;
      const NumberStatus status = ParseNumber(text, &reference, decimal);
      if (status != NumberStatus::kOk) {
        return {kReference + 1,
                NumberProblem(status, "reference_quantity", text, decimal, "survey.items")};
      }
      if (!(reference > 0)) {
        return {kReference + 1,
                "reference_quantity " + QuoteValue(text) + " is not a positive number"};
      }
      if (std::string problem = MagnitudeProblem("reference_quantity", text, reference);
          !problem.empty()) {
        return {kReference + 1, problem};
      }
    }
    const int existing = state->items.Find(item);
    if (existing >= 0) {
      const std::string& origin = state->item_origin[existing];
      if (state->item_heading[existing] == heading_index) {
        return {kItem + 1,
                "item " + QuoteValue(item) + " is listed twice (first at " + origin + ")"};
      }
      return {kHeading + 1, "item " + QuoteValue(item) + " is filed under heading " +
                                QuoteValue(heading) + " but under " +
                                QuoteValue(state->headings.Code(state->item_heading[existing])) +
                                " at " + origin};
    }
    state->items.Intern(item);
    state->item_heading.push_back(heading_index);
    state->item_origin.push_back("line " + std::to_string(record.line));
    state->item_description.emplace_back(kDescription >= 0 ? Trim(record.fields[kDescription])
                                                           : std::string_view());
    state->item_unit.emplace_back(kUnit >= 0 ? Trim(record.fields[kUnit]) : std::string_view());
    state->item_reference_quantity.push_back(reference);
    return {};
  };
  RejectedCodeCollector rejected("item", path);
  const auto on_reject = [&](const CsvRecord& record, const Columns& columns,
                             const std::string& reason) {
    rejected.Note(ValidCodeField(record, columns.index[0]), record.line, reason);
  };
  if (!ReadSmallTable(path, state->config->limits, state->config->survey.items_format,
                      {"item", "heading", "description", "unit", "reference_quantity"},
                      {true, true, false, false, false},
                      rejections, file, handle, on_reject, error))
    return false;
  rejected.Finish(state->items, state);
  // Later messages about these items name the file.
  for (std::string& origin : state->item_origin) {
    origin = path + ":" + origin.substr(5);
  }
  state->has_catalog = true;
  return true;
}

// ---------------------------------------------------------------------------
// expenditure.csv

bool ReadExpenditure(const std::string& path, LoadState* state, Rejections* rejections,
                     InputFileSummary* file, std::string* error) {
  FirstLines first_line(state->regions.size(), state->headings.size());
  auto handle = [&](const CsvRecord& record, const Columns& columns) -> RowVerdict {
    const int kRegion = columns.index[0], kHeading = columns.index[1], kValue = columns.index[2];
    // Without a region column the rows are one national basket.
    state->national_weights = kRegion < 0;
    const std::string_view region = kRegion < 0 ? std::string_view() : Trim(record.fields[kRegion]);
    const std::string_view heading = Trim(record.fields[kHeading]);
    const std::string_view value_text = record.fields[kValue];
    if (kRegion >= 0) {
      if (std::string problem = CheckCode(region, "region"); !problem.empty()) {
        return {kRegion + 1, problem};
      }
    }
    // A national row names no region: nothing to check against regions.csv.
    // A code found here is not looked up again below.
    const int known_region = kRegion >= 0 && state->regions_fixed ? state->regions.Find(region) : -1;
    if (kRegion >= 0 && state->regions_fixed && known_region < 0) {
      const auto rejected = state->rejected_region_index.find(std::string(region));
      if (rejected != state->rejected_region_index.end()) {
        RejectedCode& code = state->rejected_codes[rejected->second];
        ++code.num_expenditure_rows;
        return {kRegion + 1, RejectedCodeReason(code), RejectionCause::kRejectedCode};
      }
      return {kRegion + 1,
              "region " + QuoteValue(region) + " is not in " + state->config->survey.regions};
    }
    if (std::string problem = CheckCode(heading, "heading"); !problem.empty()) {
      return {kHeading + 1, problem};
    }
    const int known_heading = state->headings_fixed ? state->headings.Find(heading) : -1;
    if (state->headings_fixed && known_heading < 0) {
      return {kHeading + 1, "heading " + QuoteValue(heading) + " is not in the classification"};
    }
    double value = 0.0;
    const char decimal = state->config->survey.expenditure_format.decimal;
    const NumberStatus status = ParseNumber(value_text, &value, decimal);
    if (status != NumberStatus::kOk) {
      return {kValue + 1,
              NumberProblem(status, "expenditure", value_text, decimal, "survey.expenditure")};
    }
    if (value < 0) {
      return {kValue + 1, "expenditure " + QuoteValue(value_text) + " is negative"};
    }
    if (std::string problem = MagnitudeProblem("expenditure", value_text, value); !problem.empty()) {
      return {kValue + 1, problem};
    }
    const int region_index = kRegion < 0 ? -1 : known_region >= 0 ? known_region : state->regions.Intern(region);
    const int heading_index = known_heading >= 0 ? known_heading : state->headings.Intern(heading);
    const auto [first, inserted] = first_line.Add(region_index, heading_index, record.line);
    if (!inserted && kRegion < 0) {
      return {kHeading + 1, "duplicate row for heading " + QuoteValue(heading) +
                                " (first at line " + std::to_string(first) + ")"};
    }
    if (!inserted) {
      return {kRegion + 1, "duplicate row for region " + QuoteValue(region) + " and heading " +
                               QuoteValue(heading) + " (first at line " +
                               std::to_string(first) + ")"};
    }
    state->spending.push_back({region_index, heading_index, value + 0.0});
    return {};
  };
  if (!ReadSmallTable(path, state->config->limits, state->config->survey.expenditure_format,
                      {"region", "heading", "expenditure"}, {false, true, true}, rejections, file,
                      handle, nullptr, error)) {
    // The region column is optional only to allow national weights: say both forms.
    const std::string only_required = "columns heading, expenditure)";
    if (error->size() >= only_required.size() &&
        error->compare(error->size() - only_required.size(), only_required.size(),
                       only_required) == 0) {
      error->replace(error->size() - only_required.size(), only_required.size(),
                     "columns region, heading, expenditure; or heading, expenditure for national "
                     "weights)");
    }
    return false;
  }
  return true;
}

// The largest standard error of ln parity an external parity may carry.
constexpr double kLargestLogSe = 1.0;
// What to do with a heading's external parities out of range.
constexpr std::string_view kRescaleParities =
    "a heading's parities may be on any scale, so rescale them";

bool ReadExternalParities(const std::string& path, LoadState* state, Rejections* rejections,
                          InputFileSummary* file, std::string* error) {
  FirstLines first_line(state->regions.size(), state->headings.size());
  const char decimal = state->config->survey.external_parities_format.decimal;
  const char* const setting = "survey.external_parities";
  auto handle = [&](const CsvRecord& record, const Columns& columns) -> RowVerdict {
    const int kHeading = columns.index[0], kRegion = columns.index[1], kParity = columns.index[2],
              kLogSe = columns.index[3];
    const std::string_view heading = Trim(record.fields[kHeading]);
    const std::string_view region = Trim(record.fields[kRegion]);
    if (std::string problem = CheckCode(heading, "heading"); !problem.empty()) {
      return {kHeading + 1, problem};
    }
    const int heading_index = state->headings.Find(heading);
    if (heading_index < 0) {
      return {kHeading + 1, "heading " + QuoteValue(heading) +
                                (state->headings_fixed ? " is not in the classification"
                                                       : " has no price or expenditure row")};
    }
    if (std::string problem = CheckCode(region, "region"); !problem.empty()) {
      return {kRegion + 1, problem};
    }
    const int region_index = state->regions.Find(region);
    if (region_index < 0 && state->regions_fixed) {
      const auto rejected = state->rejected_region_index.find(std::string(region));
      if (rejected != state->rejected_region_index.end()) {
        RejectedCode& code = state->rejected_codes[rejected->second];
        ++code.num_external_parity_rows;
        return {kRegion + 1, RejectedCodeReason(code), RejectionCause::kRejectedCode};
      }
    }
    if (region_index < 0) {
      return {kRegion + 1, "region " + QuoteValue(region) +
                               (state->regions_fixed ? " is not in " + state->config->survey.regions
                                                     : " has no price or expenditure row")};
    }
    double parity = 0.0;
    const std::string_view parity_text = record.fields[kParity];
    const NumberStatus status = ParseNumber(parity_text, &parity, decimal);
    if (status != NumberStatus::kOk) {
      return {kParity + 1, NumberProblem(status, "parity", parity_text, decimal, setting)};
    }
    if (!(parity > 0)) {
      return {kParity + 1, "parity " + QuoteValue(parity_text) + " is not positive"};
    }
    if (std::string problem = MagnitudeProblem("parity", parity_text, parity, kRescaleParities); !problem.empty()) {
      return {kParity + 1, problem};
    }
    double log_se = std::nan("");
    if (kLogSe >= 0 && !Trim(record.fields[kLogSe]).empty()) {
      const std::string_view se_text = record.fields[kLogSe];
      const NumberStatus se_status = ParseNumber(se_text, &log_se, decimal);
      if (se_status != NumberStatus::kOk) {
        return {kLogSe + 1, NumberProblem(se_status, "log_se", se_text, decimal, setting)};
      }
      if (log_se < 0) return {kLogSe + 1, "log_se " + QuoteValue(se_text) + " is negative"};
      // ln parity's standard error: 0.05 is about 5 %. Above 1 the parity's
      // 95 % interval spans a factor of 50, and the bootstrap's draws of
      // exp(N(0, log_se^2)) overflow from about 300; most likely a
      // percentage.
      if (log_se > kLargestLogSe) {
        return {kLogSe + 1, "log_se " + QuoteValue(Trim(se_text)) +
                                " is above 1 (a standard error of ln parity; 0.05 is about 5 %): is "
                                "it a percentage?"};
      }
    }
    const auto [first, inserted] = first_line.Add(region_index, heading_index, record.line);
    if (!inserted) {
      return {kHeading + 1, "duplicate row for heading " + QuoteValue(heading) + " and region " +
                                QuoteValue(region) + " (first at line " + std::to_string(first) + ")"};
    }
    state->external.push_back({region_index, heading_index, std::log(parity), log_se});
    return {};
  };
  return ReadSmallTable(path, state->config->limits, state->config->survey.external_parities_format,
                        {"heading", "region", "parity", "log_se"}, {true, true, true, false},
                        rejections, file, handle, nullptr, error);
}

}  // namespace paritas::internal
