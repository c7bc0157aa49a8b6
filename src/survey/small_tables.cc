// The small survey tables (regions.csv, items.csv, expenditure.csv), each
// read whole and row by row, and the header and code checks that prices.csv
// shares with them.
#include <algorithm>
#include <cmath>
#include <functional>
#include <string>
#include <unordered_map>
#include <unordered_set>
#include <vector>

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
};

// Reads a small table whole: checks its header, then hands every data row
// with the header's number of fields to `handle`, counting rows read, used
// and rejected.
bool ReadSmallTable(const std::string& path, const ReadLimits& limits,
                    const std::vector<std::string>& wanted, const std::vector<bool>& required,
                    Rejections* rejections, InputFileSummary* file,
                    const std::function<RowVerdict(const CsvRecord&, const Columns&)>& handle,
                    std::string* error) {
  std::string text;
  if (!ReadWholeFile(path, limits.max_file_bytes, LimitAdvice("limits.max_file_bytes"), &text,
                     error)) {
    return false;
  }
  file->size_bytes = static_cast<int64_t>(text.size());
  file->sha256 = Sha256Hex(text);
  CsvReader reader(text);
  reader.set_limits(limits);
  Columns columns;
  if (!ReadHeader(&reader, path, wanted, required, &columns, file, error)) return false;
  CsvRecord record;
  while (reader.Next(&record)) {
    ++file->rows_read;
    RowVerdict verdict;
    if (static_cast<int>(record.fields.size()) != columns.num_fields) {
      verdict = {FieldCountColumn(record.fields.size(), columns.num_fields),
                 FieldCountProblem(record.fields.size(), columns.num_fields)};
    } else {
      verdict = handle(record, columns);
    }
    if (verdict.reason.empty()) {
      ++file->rows_used;
      continue;
    }
    rejections->Add(
        {path, record.line, LocatedMessage(path, record.line, verdict.column, verdict.reason),
         std::string(record.raw)},
        file);
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
bool ReadHeader(CsvReader* reader, const std::string& path, const std::vector<std::string>& wanted,
                const std::vector<bool>& required, Columns* columns, InputFileSummary* file,
                std::string* error) {
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
  CsvHeader names(header.fields);
  columns->num_fields = static_cast<int>(header.fields.size());
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
      const NumberStatus status = ParseNumber(value, &population);
      if (status != NumberStatus::kOk && status != NumberStatus::kEmpty) {
        return {kPopulation + 1, NumberProblem(status, "population", value)};
      }
      if (status == NumberStatus::kEmpty) population = std::nan("");
      if (population < 0) {
        return {kPopulation + 1, "population " + QuoteValue(value) + " is negative"};
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
  if (!ReadSmallTable(path, state->config->limits, {"region", "name", "population"},
                      {true, false, false}, rejections, file, handle, error))
    return false;
  state->regions_fixed = true;
  return true;
}

bool ReadItems(const std::string& path, LoadState* state, Rejections* rejections,
               InputFileSummary* file, std::string* error) {
  auto handle = [&](const CsvRecord& record, const Columns& columns) -> RowVerdict {
    const int kItem = columns.index[0], kHeading = columns.index[1];
    const int kDescription = columns.index[2], kUnit = columns.index[3];
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
    return {};
  };
  if (!ReadSmallTable(path, state->config->limits, {"item", "heading", "description", "unit"},
                      {true, true, false, false}, rejections, file, handle, error))
    return false;
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
  std::unordered_map<uint64_t, int64_t> first_line;
  auto handle = [&](const CsvRecord& record, const Columns& columns) -> RowVerdict {
    const int kRegion = columns.index[0], kHeading = columns.index[1], kValue = columns.index[2];
    const std::string_view region = Trim(record.fields[kRegion]);
    const std::string_view heading = Trim(record.fields[kHeading]);
    const std::string_view value_text = record.fields[kValue];
    if (std::string problem = CheckCode(region, "region"); !problem.empty()) {
      return {kRegion + 1, problem};
    }
    if (state->regions_fixed && state->regions.Find(region) < 0) {
      return {kRegion + 1,
              "region " + QuoteValue(region) + " is not in " + state->config->survey.regions};
    }
    if (std::string problem = CheckCode(heading, "heading"); !problem.empty()) {
      return {kHeading + 1, problem};
    }
    if (state->headings_fixed && state->headings.Find(heading) < 0) {
      return {kHeading + 1, "heading " + QuoteValue(heading) + " is not in the classification"};
    }
    double value = 0.0;
    const NumberStatus status = ParseNumber(value_text, &value);
    if (status != NumberStatus::kOk) {
      return {kValue + 1, NumberProblem(status, "expenditure", value_text)};
    }
    if (value < 0) {
      return {kValue + 1, "expenditure " + QuoteValue(value_text) + " is negative"};
    }
    const int region_index = state->regions.Intern(region);
    const int heading_index = state->headings.Intern(heading);
    const uint64_t key =
        (static_cast<uint64_t>(region_index) << 32) | static_cast<uint32_t>(heading_index);
    auto [it, inserted] = first_line.emplace(key, record.line);
    if (!inserted) {
      return {kRegion + 1, "duplicate row for region " + QuoteValue(region) + " and heading " +
                               QuoteValue(heading) + " (first at line " +
                               std::to_string(it->second) + ")"};
    }
    state->spending.push_back({region_index, heading_index, value + 0.0});
    return {};
  };
  if (!ReadSmallTable(path, state->config->limits, {"region", "heading", "expenditure"},
                      {true, true, true}, rejections, file, handle, error))
    return false;
  return true;
}

}  // namespace paritas::internal
