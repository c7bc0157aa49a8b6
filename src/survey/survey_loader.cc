// Reads the survey files, in phases: the small tables (regions, items; see
// small_tables.cc), prices.csv (price_reader.cc), expenditure, then the
// survey with its cells (survey_build.cc). This file runs the phases, keeps
// the accounting and decides whether the rejected rows stop the load.
#include "paritas/survey/survey_loader.h"

#include <omp.h>

#include <chrono>
#include <string>
#include <vector>

#include "paritas/base/csv.h"
#include "survey/loader_state.h"

namespace paritas {
namespace {

using internal::LoadState;
using internal::Rejections;

double SecondsSince(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

}  // namespace

bool LoadOptions::IsValid(std::string* error) const {
  if (max_reported_rows < 0) {
    *error = "max_reported_rows must be 0 or more";
    return false;
  }
  if (num_threads < 0) {
    *error = "num_threads must be 0 (all cores) or more";
    return false;
  }
  if (block_bytes < 1) {
    *error = "block_bytes must be positive";
    return false;
  }
  return true;
}

std::string LoadSummary::BriefReport() const {
  int64_t quotes = 0;
  for (const auto& file : files) {
    if (file.role == "prices") quotes = file.rows_used;
  }
  return "read " + std::to_string(quotes) + " quotes; " + std::to_string(num_rows_rejected) +
         " row" + (num_rows_rejected == 1 ? "" : "s") + " rejected";
}

bool LoadSurvey(const RunConfig& config, const LoadOptions& options, Survey* survey,
                LoadSummary* summary) {
  *summary = LoadSummary();
  const auto start = std::chrono::steady_clock::now();
  auto fail = [&](const std::string& message) {
    summary->outcome = LoadOutcome::kInvalidInput;
    summary->message = message;
    summary->read_seconds = SecondsSince(start);
    return false;
  };
  std::string error;
  if (!options.IsValid(&error)) return fail("invalid load options: " + error);
  if (!config.IsValid(&error)) return fail(error);

  LoadState state;
  state.config = &config;
  if (config.has_classification) {
    for (const std::string& code : config.classification.HeadingCodes())
      state.headings.Intern(code);
    state.headings_fixed = true;
  }
  Rejections rejections(options, summary);
  auto describe = [](const char* role, const std::string& path, bool given) {
    InputFileSummary file;
    file.role = role;
    file.path = path;
    file.given = given;
    return file;
  };
  summary->files = {describe("regions", config.survey.regions, !config.survey.regions.empty()),
                    describe("items", config.survey.items, !config.survey.items.empty()),
                    describe("prices", config.survey.prices, true),
                    describe("expenditure", config.survey.expenditure, true)};
  InputFileSummary& regions_file = summary->files[0];
  InputFileSummary& items_file = summary->files[1];
  InputFileSummary& prices_file = summary->files[2];
  InputFileSummary& expenditure_file = summary->files[3];

  if (regions_file.given &&
      !internal::ReadRegions(regions_file.path, &state, &rejections, &regions_file, &error)) {
    return fail(error);
  }
  if (items_file.given &&
      !internal::ReadItems(items_file.path, &state, &rejections, &items_file, &error)) {
    return fail(error);
  }
  if (!internal::ReadPrices(prices_file.path, options, &state, &rejections, &prices_file, &error)) {
    return fail(error);
  }
  if (prices_file.rows_read == 0) return fail(prices_file.path + ": no data rows (only a header)");
  internal::HandleDuplicateQuotes(prices_file.path, config.duplicate_quotes, &state, &rejections,
                                  &prices_file, summary);
  if (!internal::ReadExpenditure(expenditure_file.path, &state, &rejections, &expenditure_file,
                                 &error)) {
    return fail(error);
  }
  if (expenditure_file.rows_read == 0) {
    return fail(expenditure_file.path + ": no data rows (only a header)");
  }
  summary->read_seconds = SecondsSince(start);

  if (summary->num_rows_rejected > 0 && options.invalid_rows == InvalidRowPolicy::kStop) {
    const int64_t shown = static_cast<int64_t>(summary->rejected_rows.size());
    std::string message = std::to_string(summary->num_rows_rejected) + " invalid row" +
                          (summary->num_rows_rejected == 1 ? "" : "s");
    if (shown < summary->num_rows_rejected)
      message += " (the first " + std::to_string(shown) + " shown)";
    message += "; fix them, or set invalid_rows: skip to leave them out";
    return fail(message);
  }
  if (prices_file.rows_used == 0) {
    return fail(prices_file.path + ": no usable price quotes (all " +
                std::to_string(prices_file.rows_read) + " rows rejected)");
  }

  const auto cells_start = std::chrono::steady_clock::now();
  internal::BuildSurvey(
      &state, options.num_threads > 0 ? options.num_threads : omp_get_max_threads(), survey);
  summary->cells_seconds = SecondsSince(cells_start);
  summary->outcome = LoadOutcome::kOk;
  summary->message = "ok";
  return true;
}

std::string RejectedRowsCsv(const std::vector<RejectedRow>& rows) {
  std::string out = "file,line,reason,raw\n";
  for (const RejectedRow& row : rows) {
    AppendCsvField(row.file, &out);
    out += ',';
    out += std::to_string(row.line);
    out += ',';
    AppendCsvField(row.reason, &out);
    out += ',';
    AppendCsvField(row.raw, &out);
    out += '\n';
  }
  return out;
}

}  // namespace paritas
