// The carry job: reads the benchmark run and its survey, moves the heading
// parities by the indices (use/carry_forward.h), hands them to the normal
// aggregation stage as external heading parities and writes a run folder
// like compute's. The benchmark's survey is read again (its price files
// too) so regions, names, populations, tree, groups and labels are exactly
// the run's; its files must be the ones run.json recorded.
#include "paritas/jobs/carry_job.h"

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <limits>
#include <map>

#include <nlohmann/json.hpp>

#include "base/not_a_number.h"
#include "base/sha256.h"
#include "paritas/aggregation/normalisation.h"
#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "paritas/jobs/guards.h"
#include "paritas/jobs/jobs.h"
#include "paritas/output/output_writers.h"
#include "paritas/output/report.h"
#include "paritas/output/run_folder.h"
#include "paritas/output/run_record.h"
#include "paritas/use/heading_contributions.h"
#include "use/run_tables.h"

namespace paritas {
namespace {

namespace fs = std::filesystem;
using Json = nlohmann::json;

// What the benchmark run folder holds.
struct Benchmark {
  std::string run_id;
  Json record;
  RunConfig config;
  // Regions x headings of the loaded survey: parity (as written), its ln,
  // expenditure and source of each heading parity of parities.csv.
  Eigen::MatrixXd parity;
  Eigen::MatrixXd log_parity;
  Eigen::MatrixXd expenditure;
  Eigen::MatrixXi source;
};

std::string ParitiesPath(const std::string& dir) { return (fs::path(dir) / "parities.csv").string(); }

bool ReadBenchmarkRecord(const CarryOptions& options, Benchmark* benchmark, std::string* error) {
  std::error_code ec;
  if (!fs::is_directory(options.benchmark_dir, ec)) {
    *error = "benchmark run '" + options.benchmark_dir +
             "': no such folder (expected an output folder of 'paritas compute')";
    return false;
  }
  std::string json;
  if (!ReadRunRecord(options.benchmark_dir, &benchmark->run_id, &json, error)) return false;
  benchmark->record = Json::parse(json, nullptr, /*allow_exceptions=*/false);
  const std::string command = benchmark->record.value("command", "");
  if (command != "compute") {
    *error = (fs::path(options.benchmark_dir) / "run.json").string() + ": a record of '" +
             command + "', not of compute; carry from the benchmark's own output folder of " +
             "'paritas compute' (indices from its period to the later one)";
    return false;
  }
  const std::string config_path =
      options.config_path.empty() ? RunConfigPath(json) : options.config_path;
  if (config_path.empty()) {
    *error = (fs::path(options.benchmark_dir) / "run.json").string() +
             ": names no configuration; give it with --config";
    return false;
  }
  if (!LoadRunConfig(config_path, &benchmark->config, error)) {
    *error = "the benchmark's configuration: " + *error;
    return false;
  }
  return true;
}

// The survey's files must be those the benchmark read (by SHA-256 per role),
// but the expenditure file when a later one replaces it.
bool CheckSameInputs(const Json& record, const LoadSummary& load, bool later_expenditure,
                     std::string* error) {
  std::map<std::string, std::string> then;
  std::map<std::string, int> seen;
  for (const Json& input : record.value("inputs", Json::array())) {
    const std::string role = input.value("role", "");
    const int k = seen[role]++;
    then[k == 0 ? role : role + "[" + std::to_string(k) + "]"] = input.value("sha256", "");
  }
  seen.clear();
  for (const InputFileSummary& file : load.files) {
    if (!file.given) continue;
    const int k = seen[file.role]++;
    const std::string role = k == 0 ? file.role : file.role + "[" + std::to_string(k) + "]";
    if (later_expenditure && file.role == "expenditure") continue;
    const auto it = then.find(role);
    if (it == then.end() || it->second != file.sha256) {
      *error = file.path + ": not the " + role + " file the benchmark run read (SHA-256 " +
               (it == then.end() ? std::string("not recorded") : it->second.substr(0, 12) + "...") +
               " in run.json, " + file.sha256.substr(0, 12) +
               "... now); carry needs the benchmark's own survey";
      return false;
    }
  }
  return true;
}

std::vector<std::string> SplitOn(const std::string& text, char separator) {
  std::vector<std::string> parts(1);
  for (char c : text) {
    if (c == separator) {
      parts.emplace_back();
    } else {
      parts.back() += c;
    }
  }
  return parts;
}

ParitySource SourceFromText(std::string_view text) {
  if (text == "priced") return ParitySource::kPriced;
  if (text == "imputed") return ParitySource::kImputed;
  if (text == "external") return ParitySource::kExternal;
  return ParitySource::kNone;
}

// The heading rows of the benchmark's parities.csv, placed on the survey.
bool ReadBenchmarkHeadings(const std::string& dir, const Survey& survey, const ReadLimits& limits,
                           Benchmark* benchmark, std::string* error) {
  const std::string path = ParitiesPath(dir);
  benchmark->log_parity.setConstant(survey.num_regions(), survey.num_headings(), kNaN);
  benchmark->expenditure = benchmark->log_parity;
  benchmark->parity = benchmark->log_parity;
  benchmark->source.setZero(survey.num_regions(), survey.num_headings());
  const auto handle = [&](const internal::TableRow& row, std::string* message) {
    if (row.fields[1] != "heading") return true;
    const int h = survey.classification.FindHeading(std::string(row.fields[0]));
    const int r = survey.regions.Find(row.fields[2]);
    if (h < 0 || r < 0) {
      const bool heading = h < 0;
      *message = LocatedMessage(path, row.line, row.columns[heading ? 0 : 2],
                                std::string(heading ? "heading " : "region ") +
                                    QuoteValue(row.fields[heading ? 0 : 2]) +
                                    " is not in the benchmark's survey; give the configuration "
                                    "of this run with --config");
      return false;
    }
    double parity = kNaN, expenditure = kNaN;
    if (!internal::ParseParity(path, row.line, row.columns[3], "parity", row.fields[3], &parity,
                               message)) {
      return false;
    }
    // As compute wrote it: spending read within the survey's range, or 0.
    if (!internal::ParseNonNegative(path, row.line, row.columns[4], "expenditure", row.fields[4], &expenditure,
                                    message, internal::kInputRange)) {
      return false;
    }
    benchmark->parity(r, h) = parity;
    benchmark->log_parity(r, h) = std::log(parity);
    benchmark->expenditure(r, h) = expenditure;
    benchmark->source(r, h) = static_cast<int>(SourceFromText(row.fields[5]));
    return true;
  };
  return internal::ReadRunTable(
      dir, "parities.csv", limits, {"node", "kind", "region", "parity", "expenditure", "source"},
      {true, true, true, true, true, false}, handle, error, benchmark->run_id);
}

// An input file that is not a survey file, for run.json's inputs.
bool DescribeInput(const std::string& role, const std::string& path, const ReadLimits& limits,
                   InputFileSummary* file, std::string* error) {
  std::string contents;
  if (!ReadWholeFile(path, limits.max_file_bytes, LimitAdvice("limits.max_file_bytes"), &contents,
                     error)) {
    return false;
  }
  internal::Sha256 hasher;
  hasher.Update(contents.data(), contents.size());
  file->role = role;
  file->path = path;
  file->given = true;
  file->size_bytes = static_cast<int64_t>(contents.size());
  file->sha256 = hasher.HexDigest();
  return true;
}

// The benchmark's survey without its quotes, the carried heading parities
// as external parities.
void MakeCarriedSurvey(const CarriedHeadings& carried, const std::string& indices_path,
                       Survey* survey) {
  survey->cells = CellPrices();
  for (HeadingRange& range : survey->heading_range) range.cell_begin = range.cell_end = 0;
  survey->num_quotes = 0;
  survey->external_log_parity = carried.log_parity;
  survey->external_log_se.setConstant(survey->num_regions(), survey->num_headings(), kNaN);
  survey->external_path = indices_path;
}

// Warnings about quotes (there are none in a carried run: the benchmark's
// stand in its own folder) are left out; the extrapolation is stated.
void CarryWarnings(const CarryOptions& options, CarrySummary* summary) {
  PlausibilityResult& p = summary->plausibility;
  const auto about_quotes = [](const std::string& kind) {
    return kind == "thin-evidence" || kind == "single-item-heading";
  };
  p.warnings.erase(std::remove_if(p.warnings.begin(), p.warnings.end(),
                                  [&](const RunWarning& w) { return about_quotes(w.kind); }),
                   p.warnings.end());
  for (auto& node : p.node_region_kinds) {
    for (std::string& kinds : node) {
      std::vector<std::string> kept;
      for (const std::string& kind : SplitOn(kinds, ';')) {
        if (!kind.empty() && !about_quotes(kind)) kept.push_back(kind);
      }
      kept.push_back("extrapolated");
      kinds = JoinNames(kept, ";");
    }
  }
  const Survey& survey = summary->survey;
  p.warnings.push_back({"extrapolated", "", "",
                        ExtrapolationCaution(summary->benchmark_run_id, summary->period)});
  for (const auto& [r, h] : summary->carried.filled_by_rule) {
    const std::string region(survey.regions.Code(r));
    p.warnings.push_back(
        {"extrapolated", survey.heading_codes[h], region,
         "no price index for region '" + region + "' in heading '" + survey.heading_codes[h] +
             "' (nor above it): moved as the country's (index " +
             FormatFixed(summary->carried.country_index(h), 4) + ", --missing-index " +
             ToString(options.missing_index) + "), so its relative parity is the benchmark's"});
  }
  summary->warnings = CollectWarnings(summary->load, summary->compute.warnings, p);
}

// carried_headings.csv: how each heading parity was carried.
std::string CarriedHeadingsCsv(const CarrySummary& summary, const Benchmark& benchmark) {
  const Survey& survey = summary.survey;
  const Classification& tree = survey.classification;
  std::string out =
      "heading,region,benchmark_parity,index,index_from,country_index,relative_movement,parity,"
      "rule\n";
  for (int h = 0; h < survey.num_headings(); ++h) {
    const NodeResult& node = summary.result.nodes[tree.headings()[h]];
    for (int r = 0; r < survey.num_regions(); ++r) {
      if (!std::isfinite(summary.carried.log_parity(r, h))) continue;
      AppendCsvField(survey.heading_codes[h], &out);
      out += ',';
      AppendCsvField(survey.regions.Code(r), &out);
      out += ',';
      AppendShortest(benchmark.parity(r, h), &out);
      out += ',';
      AppendShortest(summary.carried.index_used(r, h), &out);
      out += ',';
      const int from = summary.indices.from_node(r, h);
      if (from >= 0) AppendCsvField(tree.nodes()[from].code, &out);
      out += ',';
      AppendShortest(summary.carried.country_index(h), &out);
      out += ',';
      AppendShortest(summary.carried.index_used(r, h) / summary.carried.country_index(h), &out);
      out += ',';
      AppendShortest(node.parity(r), &out);
      out += from >= 0 ? ",index\n" : ",country\n";
    }
  }
  return out;
}

// run.json's `carry` section.
std::string CarrySectionJson(const CarryOptions& options, const CarrySummary& summary) {
  Json country = Json::object();
  for (int h = 0; h < summary.survey.num_headings(); ++h) {
    const double c = summary.carried.country_index(h);
    if (std::isfinite(c)) country[summary.survey.heading_codes[h]] = c;
  }
  int64_t carried = 0;
  for (int h = 0; h < summary.carried.log_parity.cols(); ++h) {
    for (int r = 0; r < summary.carried.log_parity.rows(); ++r) {
      carried += std::isfinite(summary.carried.log_parity(r, h)) ? 1 : 0;
    }
  }
  Json out = {
      {"extrapolated", true},
      {"benchmark_folder", options.benchmark_dir},
      {"benchmark_run_id", summary.benchmark_run_id},
      {"period", summary.period},
      {"indices", options.indices_path},
      {"weights", summary.weights},
      {"later_expenditure", options.expenditure_path.empty() ? Json() : Json(options.expenditure_path)},
      {"missing_index", ToString(options.missing_index)},
      {"num_heading_parities_carried", carried},
      {"num_moved_as_country", summary.carried.filled_by_rule.size()},
      {"country_index", country},
      {"caution", ExtrapolationCaution(summary.benchmark_run_id, summary.period)}};
  return out.dump();
}

// Every file of the carried run but run.json.
std::vector<OutputFile> CarryFiles(const CarryOptions& options, const RunConfig& config,
                                   const Benchmark& benchmark, CarrySummary* summary) {
  const Survey& survey = summary->survey;
  const ParityResult& result = summary->result;
  const ContributionTable contributions =
      HeadingContributions(survey, result, ComputeOptions::FromConfig(config).reference,
                           config.threads);
  std::vector<OutputFile> files;
  files.push_back(
      {"parities.csv", ParitiesCsv(survey, result, &summary->plausibility, summary->period)});
  files.push_back({"contributions.csv", ContributionsCsv(survey, contributions)});
  files.push_back({"carried_headings.csv", CarriedHeadingsCsv(*summary, benchmark)});
  files.push_back({"warnings.csv", WarningsCsv(summary->warnings)});
  // The root's region x region tables, within compute's size limit
  // (matrices_up_to_regions): they grow with regions squared.
  const NodeResult& root = result.nodes.front();
  const std::string name = NodeFileName(survey.classification.nodes()[0].code) + ".csv";
  if (survey.num_regions() <= config.matrices_up_to_regions) {
    files.push_back({"matrix/" + name, ParityMatrixCsv(survey, root)});
    if (!root.is_heading) {
      files.push_back(
          {"bilateral/" + name, AggregateBilateralCsv(survey, root, result.bilaterals[0])});
    }
  }
  if (options.report) {
    ReportInputs report;
    report.config = &config;
    report.survey = &survey;
    report.load = &summary->load;
    report.result = &result;
    report.compute = &summary->compute;
    report.warnings = summary->warnings;
    report.plausibility = &summary->plausibility;
    report.contributions = &contributions;
    report.explain_region = config.report_region;
    report.extrapolation_caution =
        ExtrapolationCaution(summary->benchmark_run_id, summary->period) + ".";
    files.push_back({"report.html", ReportHtml(report)});
  }
  return files;
}

// Loads the benchmark's survey (with the later expenditure when given) and
// its heading parities, checked against the run record.
bool LoadBenchmark(const CarryOptions& options, Benchmark* benchmark, CarrySummary* summary,
                   std::string* error) {
  RunConfig load_config = benchmark->config;
  if (!options.expenditure_path.empty()) load_config.survey.expenditure = options.expenditure_path;
  LoadOptions load_options;
  load_options.invalid_rows = load_config.invalid_rows;
  load_options.num_threads = options.num_threads;
  if (!LoadSurvey(load_config, load_options, &summary->survey, &summary->load)) {
    *error = summary->load.message;
    return false;
  }
  return CheckSameInputs(benchmark->record, summary->load, !options.expenditure_path.empty(),
                         error) &&
         ReadBenchmarkHeadings(options.benchmark_dir, summary->survey, benchmark->config.limits,
                               benchmark, error);
}

}  // namespace

bool CarryOptions::IsValid(std::string* error) const {
  if (benchmark_dir.empty()) {
    *error = "the benchmark run folder is required";
    return false;
  }
  if (indices_path.empty()) {
    *error = "--indices is required (a file region,node,period,index)";
    return false;
  }
  if (output_dir.empty()) {
    *error = "--output is required (the folder of the carried run)";
    return false;
  }
  if (num_threads < 0 || num_threads > 1024) {
    *error = "threads must be from 0 (all cores) to 1024";
    return false;
  }
  return true;
}

std::string ExtrapolationCaution(const std::string& benchmark_run_id, const std::string& period) {
  return "every parity of this run is extrapolated: the heading parities of benchmark run " +
         benchmark_run_id + " moved to period '" + period +
         "' by regional price indices relative to the country's, not measured by a price "
         "survey. Such carried parities drift away from what a new benchmark survey finds, and "
         "the drift grows with the years carried (common practice is to replace them by the "
         "next benchmark and report the difference); read them as provisional";
}

}  // namespace paritas

namespace paritas {
namespace {

// The run record of a carried run: command "carry", the benchmark's
// configuration and survey files, the index file and the benchmark's
// parities among the inputs, and the `carry` section.
std::string CarryRunJson(const CarryOptions& options, const RunConfig& config,
                         const CarrySummary& summary, const std::vector<OutputFile>& files) {
  RunRecord record;
  record.command = "carry";
  record.run_id = summary.run_id;
  record.output_digests = DigestOutputs(files);
  record.config = &config;
  record.load = &summary.load;
  record.survey = &summary.survey;
  record.compute = &summary.compute;
  record.outcome = "ok";
  record.message = "extrapolated to period '" + summary.period + "': " + summary.compute.BriefReport();
  record.exit_code = kExitOk;
  for (const RunWarning& w : summary.warnings) record.warnings.push_back(w.text);
  record.warning_counts = CountWarnings(summary.warnings);
  record.outputs = summary.outputs;
  record.sections.push_back({"carry", CarrySectionJson(options, summary)});
  record.sections.push_back(
      {"missing_parities", MissingParitiesRecordJson(summary.survey, summary.result)});
  return RunRecordJson(record);
}

// Carries the loaded benchmark and aggregates: the heading parities as
// external parities, then the normal aggregation stage.
int CarryAndAggregate(const CarryOptions& options, const Benchmark& benchmark,
                      CarrySummary* summary, std::string* error) {
  Survey& survey = summary->survey;
  const std::vector<std::string> regions = survey.regions.Codes();
  if (!ReadPriceIndices(options.indices_path, benchmark.config.limits, survey.classification,
                        regions, options.period, &summary->indices, error)) {
    return kExitInvalidInput;
  }
  summary->period = summary->indices.period;
  summary->weights = options.expenditure_path.empty() ? "benchmark" : "later";
  if (!CarryHeadingParities(benchmark.log_parity, summary->indices.index, benchmark.expenditure,
                            options.missing_index, regions, survey.heading_codes,
                            &summary->carried, error)) {
    return kExitInvalidInput;
  }
  MakeCarriedSurvey(summary->carried, options.indices_path, &survey);
  if (!ComputeParities(survey, ComputeOptions::FromConfig(benchmark.config), &summary->result,
                       &summary->compute)) {
    *error = summary->compute.message;
    return summary->compute.outcome == ComputeOutcome::kComputationFailed ? kExitComputationFailed
                                                                         : kExitInvalidInput;
  }
  // A carried parity keeps the benchmark's source (priced, external or
  // imputed there); extrapolated_to says it was carried.
  Eigen::MatrixXi& source = summary->result.heading_source;
  for (int h = 0; h < survey.num_headings(); ++h) {
    for (int r = 0; r < survey.num_regions(); ++r) {
      if (std::isfinite(summary->carried.log_parity(r, h))) source(r, h) = benchmark.source(r, h);
    }
  }
  summary->plausibility = CheckPlausibility(survey, summary->result, benchmark.config);
  CarryWarnings(options, summary);
  return kExitOk;
}

}  // namespace

int RunCarry(const CarryOptions& options, CarrySummary* summary) {
  *summary = CarrySummary();
  const auto fail = [summary](int code, const std::string& message) {
    summary->exit_code = code;
    summary->message = message;
    return code;
  };
  std::string error;
  if (!options.IsValid(&error)) return fail(kExitInvalidInput, error);
  Benchmark benchmark;
  if (!ReadBenchmarkRecord(options, &benchmark, &error)) return fail(kExitInvalidInput, error);
  summary->benchmark_run_id = benchmark.run_id;
  RunConfig& config = benchmark.config;
  config.output = options.output_dir;
  config.report = options.report;
  config.threads = options.num_threads;
  PathGuard guard = GuardInputsOf(config);
  guard.AddInput(options.indices_path, "price index file");
  guard.AddInput(options.expenditure_path, "expenditure file (--expenditure)");
  guard.AddInput(ParitiesPath(options.benchmark_dir), "benchmark parities");
  guard.AddInput((fs::path(options.benchmark_dir) / "run.json").string(), "benchmark run record");
  guard.AddOutputFolder(options.output_dir, "--output");
  if (!guard.Check(&error)) return fail(kExitInvalidInput, error);
  if (!LoadBenchmark(options, &benchmark, summary, &error)) return fail(kExitInvalidInput, error);
  const int code = CarryAndAggregate(options, benchmark, summary, &error);
  if (code != kExitOk) return fail(code, error);
  // The index file and the benchmark's parities are inputs of the run too.
  for (const auto& [role, path] :
       {std::pair<std::string, std::string>{"price_indices", options.indices_path},
        {"benchmark_parities", ParitiesPath(options.benchmark_dir)}}) {
    InputFileSummary file;
    if (!DescribeInput(role, path, config.limits, &file, &error)) return fail(kExitInvalidInput, error);
    summary->load.files.push_back(file);
  }
  summary->load.files.back().rows_read = summary->indices.num_rows_read;
  std::vector<OutputFile> files = CarryFiles(options, config, benchmark, summary);
  for (const OutputFile& file : files) summary->outputs.push_back(file.relative_path);
  summary->outputs.push_back("run.json");
  summary->exit_code = kExitOk;
  summary->message = "ok";
  summary->run_id = NewRunId();
  files.push_back({"run.json", CarryRunJson(options, config, *summary, files)});
  RunFolderSummary written;
  if (!WriteRunFolder(options.output_dir, files, &written, &error)) {
    return fail(kExitInvalidInput, error);
  }
  return kExitOk;
}

std::string CarriedRunNote(const std::string& run_dir) {
  std::string run_id, json, error;
  if (!ReadRunRecord(run_dir, &run_id, &json, &error)) return "";
  const Json record = Json::parse(json, nullptr, /*allow_exceptions=*/false);
  if (!record.is_object() || record.value("command", "") != "carry") return "";
  const Json carry = record.value("carry", Json::object());
  if (!carry.is_object()) return "";
  return "the parities of " + run_dir + " are extrapolated to period '" +
         carry.value("period", "") + "' (paritas carry): " + carry.value("caution", "");
}

std::string CarrySummary::FullReport() const {
  std::string out = "EXTRAPOLATED: " + ExtrapolationCaution(benchmark_run_id, period) + ".\n\n";
  int64_t carried_pairs = 0;
  for (int h = 0; h < carried.log_parity.cols(); ++h) {
    for (int r = 0; r < carried.log_parity.rows(); ++r) {
      carried_pairs += std::isfinite(carried.log_parity(r, h)) ? 1 : 0;
    }
  }
  out += "carried " + FormatCount(carried_pairs) + " heading parities of " +
         FormatCount(survey.num_regions()) + " regions to period '" + period + "' (" +
         FormatCount(indices.num_rows_used) + " index rows used, " +
         FormatCount(indices.num_rows_other_period) + " of other periods); " +
         FormatCount(static_cast<int64_t>(carried.filled_by_rule.size())) +
         " moved as the country for want of an index; aggregated with the " +
         (weights == "later" ? std::string("later period's") : std::string("benchmark's")) +
         " expenditure weights\n";
  out += compute.BriefReport() + "; " + FormatCount(static_cast<int64_t>(warnings.size())) +
         (warnings.size() == 1 ? " warning" : " warnings") + " (in warnings.csv)\n";
  if (result.nodes.empty()) return out;
  out += "\nextrapolated parities for " + NodeTitle(survey.classification, 0) + " (" +
         result.nodes.front().reference_used + " = 100), dearest first:\n";
  out += RootTable(survey, result, RegionSpreads(result.bilaterals.front()));
  out += "(" + ReferenceConvention(result.nodes.front().reference_used) + ".)\n";
  out +=
      "\nEvery row of parities.csv says extrapolated_to = '" + period +
      "'; carried_headings.csv shows each heading parity's index and the country's. When the "
      "next benchmark is computed, 'paritas compare' of this folder with it gives the drift.\n";
  return out;
}

}  // namespace paritas
