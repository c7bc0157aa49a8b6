// Reads the survey files, in phases: the small tables (regions, items; see
// small_tables.cc), prices.csv (price_reader.cc), expenditure, then the
// survey with its cells (survey_build.cc). This file runs the phases, keeps
// the accounting and decides whether the rejected rows stop the load.
#include "paritas/survey/survey_loader.h"

#include <omp.h>

#include <chrono>
#include <cmath>
#include <filesystem>
#include <string>
#include <system_error>
#include <vector>

#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "survey/loader_state.h"

namespace paritas {
namespace {

using internal::LoadState;
using internal::Rejections;

double SecondsSince(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

std::string Rows(int64_t n, const char* what) {
  return FormatCount(n) + " " + what + " row" + (n == 1 ? "" : "s");
}

// Rows rejected because their item was filed under a second heading.
int64_t ConflictRows(const std::vector<HeadingConflict>& conflicts) {
  int64_t n = 0;
  for (const HeadingConflict& conflict : conflicts) {
    for (const HeadingConflict::Other& other : conflict.others) n += other.num_rows;
  }
  return n;
}

// Moves the rejected codes that left rows out, and the heading conflicts
// with what was used, from the state to the summary.
void SummariseRejections(const std::string& prices_path, LoadState* state, LoadSummary* summary) {
  for (RejectedCode& code : state->rejected_codes) {
    if (code.num_price_rows + code.num_expenditure_rows + code.num_external_parity_rows > 0) {
      summary->rejected_codes.push_back(std::move(code));
    }
  }
  if (state->heading_conflicts.empty()) return;
  std::vector<int64_t> rows_per_item(state->items.size(), 0);
  for (int32_t item : state->quotes.item) ++rows_per_item[item];
  for (HeadingConflict& conflict : state->heading_conflicts) {
    const int item = state->items.Find(conflict.item);
    if (item < 0 || state->item_heading[item] < 0) continue;  // never stated: nothing used
    conflict.heading_used = std::string(state->headings.Code(state->item_heading[item]));
    const std::string& origin = state->item_origin[item];
    conflict.origin_used =
        origin.rfind("line ", 0) == 0 ? prices_path + ":" + origin.substr(5) : origin;
    conflict.num_rows_used = rows_per_item[item];
    summary->heading_conflicts.push_back(std::move(conflict));
  }
}

// The message of a load stopped by rejected rows (invalid_rows: stop); the
// rows of rejected regions and items are counted apart, as they are not
// listed.
std::string StopMessage(const LoadSummary& summary) {
  const int64_t cascade = summary.num_rows_rejected_by_cascade;
  const int64_t own = summary.num_rows_rejected - cascade;
  const int64_t shown = static_cast<int64_t>(summary.rejected_rows.size());
  std::string message = std::to_string(own) + " invalid row" + (own == 1 ? "" : "s");
  if (shown < own) message += " (the first " + std::to_string(shown) + " shown)";
  if (cascade > 0) message += ", " + FormatCount(cascade) + " rows of rejected regions or items";
  return message + "; fix them, or set invalid_rows: skip to leave them out";
}

// Bytes of the price files from the `first` on, of those whose size can be
// had (a pipe or a missing file counts 0: its reading says what is wrong).
double PriceFileBytesFrom(const std::vector<PriceSource>& sources, size_t first) {
  double bytes = 0.0;
  for (size_t k = first; k < sources.size(); ++k) {
    std::error_code ec;
    const uintmax_t size = std::filesystem::file_size(sources[k].path, ec);
    if (!ec) bytes += static_cast<double>(size);
  }
  return bytes;
}

// Reads the price files in the order given, each of which must hold a data row.
bool ReadPriceFiles(const RunConfig& config, const LoadOptions& options, LoadState* state,
                    Rejections* rejections, const std::vector<InputFileSummary*>& files,
                    std::string* error) {
  const std::vector<PriceSource>& sources = config.survey.prices;
  for (size_t k = 0; k < sources.size(); ++k) {
    const std::string setting =
        sources.size() == 1 ? "survey.prices" : "survey.prices[" + std::to_string(k) + "]";
    state->quote_file_begin.push_back(state->quotes.size());
    const double later_bytes = PriceFileBytesFrom(sources, k + 1);
    if (!internal::ReadPrices(sources[k], setting, options, later_bytes, state, rejections, files[k], error)) {
      return false;
    }
    if (files[k]->rows_read == 0) {
      *error = files[k]->path + ": no data rows (only a header)";
      return false;
    }
  }
  return true;
}

// "quantities of 2 items (bread, flour: 40 quotes) were taken per 1 unit: the
// items have no reference_quantity in items.csv".
std::string WithoutReferenceWarning(const LoadState& state) {
  constexpr size_t kMaxListed = 5;
  std::vector<std::string> codes;
  for (int item : state.items_without_reference) {
    if (codes.size() == kMaxListed) {
      codes.push_back("...");
      break;
    }
    codes.emplace_back(state.items.Code(item));
  }
  const size_t n = state.items_without_reference.size();
  const std::string where = state.config->survey.items.empty()
                                ? "no items file (survey.items) gives a reference_quantity"
                                : (n == 1 ? "the item has" : "the items have") +
                                      std::string(" no reference_quantity in ") +
                                      state.config->survey.items;
  return "prices of " + FormatCount(static_cast<int64_t>(n)) + " item" + (n == 1 ? "" : "s") +
         " (" + JoinNames(codes) + "; " + FormatCount(state.num_quotes_without_reference) +
         " quotes) are per 1 unit of their quantity column: " + where +
         "; parities do not depend on this unless some quotes of the item carry no quantity";
}

}  // namespace

std::string RejectedCode::Describe() const {
  std::vector<std::string> left_out;
  if (num_price_rows > 0) left_out.push_back(Rows(num_price_rows, "price"));
  if (num_expenditure_rows > 0) left_out.push_back(Rows(num_expenditure_rows, "expenditure"));
  if (num_external_parity_rows > 0) {
    left_out.push_back(Rows(num_external_parity_rows, "external parity"));
  }
  const bool one = num_price_rows + num_expenditure_rows + num_external_parity_rows == 1;
  // "A and B", "A, B and C".
  std::string listed = left_out.empty() ? std::string() : left_out.back();
  if (left_out.size() >= 2) {
    left_out.pop_back();
    listed = JoinNames(left_out, ", ") + " and " + listed;
  }
  return kind + " " + QuoteValue(code) + " was rejected at " + file + ":" + std::to_string(line) +
         " (" + reason + "), so its " + listed + (one ? " is" : " are") +
         " left out";
}

std::string HeadingConflict::Describe(const std::string& prices_path) const {
  int64_t rejected = 0;
  std::vector<std::string> listed;
  for (const Other& other : others) {
    rejected += other.num_rows;
    listed.push_back(QuoteValue(other.heading) + " in " + FormatCount(other.num_rows) +
                     " (first at " + (other.file.empty() ? prices_path : other.file) + ":" +
                     std::to_string(other.first_line) + ")");
  }
  return "item " + QuoteValue(item) + " is filed under " + QuoteValue(heading_used) + " (" +
         origin_used + "; " + Rows(num_rows_used, "price") +
         " used) and under another heading in " + Rows(rejected, "price") +
         ", rejected: " + JoinNames(listed);
}

std::string LoadSummary::DescribeRejections(size_t limit) const {
  std::string out;
  size_t num_shown = 0;
  for (const RejectedRow& row : rejected_rows) {
    if (row.cause != RejectionCause::kRow) continue;
    if (num_shown == limit) break;
    out += row.reason + "\n";
    ++num_shown;
  }
  const int64_t own =
      num_rows_rejected - num_rows_rejected_by_cascade - ConflictRows(heading_conflicts);
  if (own > static_cast<int64_t>(num_shown)) {
    out += "... " + FormatCount(own - static_cast<int64_t>(num_shown)) + " more\n";
  }
  std::string prices_path;
  for (const InputFileSummary& file : files) {
    if (file.role == "prices") prices_path = file.path;
  }
  for (const HeadingConflict& conflict : heading_conflicts) {
    out += conflict.Describe(prices_path) + "\n";
  }
  for (const RejectedCode& code : rejected_codes) out += code.Describe() + "\n";
  return out;
}

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
  if (chunk_bytes < 1) {
    *error = "chunk_bytes must be positive";
    return false;
  }
  return true;
}

std::string LoadSummary::BriefReport() const {
  int64_t quotes = 0;
  for (const auto& file : files) {
    if (file.role == "prices") quotes += file.rows_used;
  }
  return "read " + std::to_string(quotes) + " quotes; " + std::to_string(num_rows_rejected) +
         " row" + (num_rows_rejected == 1 ? "" : "s") + " rejected";
}

namespace {

// Moves the external parities read into the survey's region x heading
// matrices (the state's indices mapped by code).
void FillExternalParities(const internal::LoadState& state, Survey* survey) {
  const double nan = std::nan("");
  survey->external_log_parity.setConstant(survey->num_regions(), survey->num_headings(), nan);
  survey->external_log_se = survey->external_log_parity;
  survey->external_path = state.config->survey.external_parities;
  for (const auto& row : state.external) {
    const int r = survey->regions.Find(state.regions.Code(row.region));
    const int h = survey->classification.FindHeading(std::string(state.headings.Code(row.heading)));
    if (r < 0 || h < 0) continue;  // cannot happen: both were known when read
    survey->external_log_parity(r, h) = row.log_parity;
    survey->external_log_se(r, h) = row.log_se;
  }
}

}  // namespace

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
  auto describe = [](const char* role, const std::string& path, const CsvFormat& format,
                     bool given) {
    InputFileSummary file;
    file.role = role;
    file.path = path;
    file.format = format;
    file.given = given;
    return file;
  };
  const SurveyFiles& files = config.survey;
  summary->files = {
      describe("regions", files.regions, files.regions_format, !files.regions.empty()),
      describe("items", files.items, files.items_format, !files.items.empty())};
  // Room for every file, the external parities file last, so the references
  // and pointers taken below stay valid.
  summary->files.reserve(files.prices.size() + 4);
  for (const PriceSource& source : files.prices) {
    summary->files.push_back(describe("prices", source.path, source.format, true));
    summary->files.back().columns = source.columns;
  }
  summary->files.push_back(
      describe("expenditure", files.expenditure, files.expenditure_format, true));
  InputFileSummary& regions_file = summary->files[0];
  InputFileSummary& items_file = summary->files[1];
  std::vector<InputFileSummary*> price_files;
  for (size_t k = 0; k < files.prices.size(); ++k) price_files.push_back(&summary->files[2 + k]);
  InputFileSummary& expenditure_file = summary->files.back();

  if (regions_file.given &&
      !internal::ReadRegions(regions_file.path, &state, &rejections, &regions_file, &error)) {
    return fail(error);
  }
  if (items_file.given &&
      !internal::ReadItems(items_file.path, &state, &rejections, &items_file, &error)) {
    return fail(error);
  }
  if (!ReadPriceFiles(config, options, &state, &rejections, price_files, &error)) {
    return fail(error);
  }
  const int num_threads = options.num_threads > 0 ? options.num_threads : omp_get_max_threads();
  internal::HandleDuplicateQuotes(config.duplicate_quotes, num_threads, &state, &rejections,
                                  price_files, summary);
  if (!internal::ReadExpenditure(expenditure_file.path, &state, &rejections, &expenditure_file,
                                 &error)) {
    return fail(error);
  }
  if (expenditure_file.rows_read == 0) {
    return fail(expenditure_file.path + ": no data rows (only a header)");
  }
  if (!files.external_parities.empty()) {
    summary->files.push_back(describe("external_parities", files.external_parities,
                                      files.external_parities_format, true));
    if (!internal::ReadExternalParities(files.external_parities, &state, &rejections,
                                        &summary->files.back(), &error)) {
      return fail(error);
    }
  }
  summary->read_seconds = SecondsSince(start);
  summary->num_quote_array_moves = state.num_quote_array_moves;
  SummariseRejections(price_files[0]->path, &state, summary);
  if (!state.items_without_reference.empty()) {
    summary->warnings.push_back(WithoutReferenceWarning(state));
  }

  if (summary->num_rows_rejected > 0 && options.invalid_rows == InvalidRowPolicy::kStop) {
    return fail(StopMessage(*summary));
  }
  int64_t rows_read = 0, rows_used = 0;
  for (const InputFileSummary* file : price_files) {
    rows_read += file->rows_read;
    rows_used += file->rows_used;
  }
  if (rows_used == 0) {
    return fail((price_files.size() == 1 ? price_files[0]->path
                                         : "survey.prices (" + std::to_string(price_files.size()) +
                                               " files)") +
                ": no usable price quotes (all " + std::to_string(rows_read) + " rows rejected)");
  }

  // The cells stage runs from here to the end of the load, so the two
  // stages cover it whole.
  const auto cells_start = std::chrono::steady_clock::now();
  internal::BuildSurvey(&state, num_threads, survey);
  if (!files.external_parities.empty()) FillExternalParities(state, survey);
  const bool grouped = ApplyGroupsAndLabels(config, &survey->classification, &error);
  summary->cells_seconds = SecondsSince(cells_start);
  if (!grouped) return fail(error);
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
