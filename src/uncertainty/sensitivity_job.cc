// The `paritas sensitivity` job: load, run, then write the part tables, the
// report redrawn with the intervals and run.json, whole or not at all. Also
// what the command prints and what the report and run.json take from a run.
#include <algorithm>
#include <cmath>
#include <filesystem>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "paritas/base/text.h"
#include "paritas/jobs/guards.h"
#include "paritas/jobs/jobs.h"
#include "paritas/output/output_writers.h"
#include "paritas/output/run_folder.h"
#include "paritas/output/report.h"
#include "paritas/output/run_record.h"
#include "paritas/uncertainty/items_needed.h"
#include "paritas/uncertainty/outliers.h"
#include "paritas/uncertainty/sensitivity.h"

namespace paritas {
namespace {

// The finite entries of the root's row (row 0), sorted ascending.
std::vector<double> SortedFiniteRoot(const Eigen::MatrixXd& matrix) {
  std::vector<double> values;
  for (Eigen::Index r = 0; r < matrix.cols(); ++r) {
    if (std::isfinite(matrix(0, r))) values.push_back(matrix(0, r));
  }
  std::sort(values.begin(), values.end());
  return values;
}

nlohmann::ordered_json RecordSettings(const SensitivityOptions& options) {
  nlohmann::ordered_json settings;
  std::vector<std::string> parts;
  if (options.run_bootstrap) parts.push_back("bootstrap");
  if (options.run_leave_one_out) parts.push_back("leave-one-out");
  if (options.run_coverage) parts.push_back("coverage");
  if (options.run_methods) parts.push_back("methods");
  settings["parts"] = parts;
  settings["replicates"] = options.replicates;
  settings["bootstrap"] = ToString(options.bootstrap);
  settings["write_replicates"] = options.write_replicates;
  settings["all_pairs"] = options.all_pairs;
  settings["seed"] = options.seed;
  settings["level"] = options.level;
  settings["interval"] = ToString(options.interval);
  settings["coverage_levels"] = options.coverage_levels;
  settings["coverage_repetitions"] = options.coverage_repetitions;
  settings["target_log_se"] = options.target_log_se;
  settings["threads"] = options.num_threads;
  settings["node"] = options.node;
  return settings;
}

nlohmann::ordered_json RecordCounts(const SensitivitySummary& summary) {
  nlohmann::ordered_json counts;
  counts["num_replicates"] = summary.num_replicates;
  counts["num_replicates_unlinked"] = summary.num_replicates_unlinked;
  counts["num_replicates_region_lost"] = summary.num_replicates_region_lost;
  counts["num_replicates_imputed"] = summary.num_replicates_imputed;
  counts["num_items_dropped"] = summary.num_items_dropped;
  counts["num_headings_dropped"] = summary.num_headings_dropped;
  counts["num_coverage_runs"] = summary.num_coverage_runs;
  counts["num_method_runs"] = summary.num_method_runs;
  counts["num_method_runs_failed"] = summary.num_method_runs_failed;
  return counts;
}

nlohmann::ordered_json RecordSeconds(const SensitivitySummary& summary) {
  nlohmann::ordered_json seconds;
  seconds["full_sample"] = summary.full_sample_seconds;
  seconds["bootstrap"] = summary.bootstrap_seconds;
  seconds["leave_one_out"] = summary.leave_one_out_seconds;
  seconds["coverage"] = summary.coverage_seconds;
  seconds["methods"] = summary.methods_seconds;
  return seconds;
}

// What the terminal says under the table about each part that was run.
std::string Notes(const SensitivityJobSummary& job, const SensitivityOptions& options) {
  const SensitivityResult& result = job.result;
  std::string notes;
  if (result.boot_median.size() > 0) {
    notes += std::string(options.interval == IntervalKind::kExpanded
                             ? "(interval: bootstrap expanded percentile interval of the parity "
                               "(percentiles widened for the degrees of freedom of the items "
                               "behind it; interval_df in bootstrap.csv) over "
                             : "(interval: bootstrap percentile interval of the parity over ") +
             std::to_string(job.sensitivity.num_replicates) +
             (options.bootstrap == BootstrapKind::kRescaled
                  ? " rescaled resamples (n - 1 of the n items of every heading)"
                  : " plain resamples (n of the n items of every heading)") +
             "; ranks: the percentile interval of the rank, "
             "1 = dearest; boot se and jk se: bootstrap and jackknife standard errors of ln "
             "parity.)\n";
  }
  if (result.jackknife_log_se.size() > 0) {
    notes +=
        "(largest change: the largest move of the parity when one item or one basic heading "
        "is left out.)\n";
  }
  if (result.method_log_spread.size() > 0) {
    notes += "(method spread: ln(largest / smallest parity) over the " +
             std::to_string(result.methods.size()) +
             " combinations of elementary and aggregation method.)\n";
  }
  notes += PairRatiosNote(job.survey, result);
  if (!result.coverage.empty()) {
    const std::string& root = job.survey.classification.nodes().front().code;
    notes += "\ncoverage curve for '" + root + "' (median over regions of the sd of ln parity):\n";
    for (const CoverageLevel& level : result.coverage) {
      const std::vector<double> sd = SortedFiniteRoot(level.log_sd);
      notes += "  " + FormatFixed(100.0 * level.coverage, 0) + " % of items: " +
               (sd.empty() ? std::string("-") : FormatFixed(PercentileType7(sd, 0.5), 4)) + "\n";
    }
  }
  return notes;
}

// The job's warnings: those compute raises on the full sample (rows left
// out, computation, plausibility checks, gross outliers), then what the
// parts met.
std::vector<RunWarning> JobWarnings(const SensitivityJobSummary& job,
                                    const PlausibilityResult& plausibility) {
  std::vector<RunWarning> warnings =
      CollectWarnings(job.load, job.sensitivity.full_sample.warnings, plausibility);
  auto add = [&](std::string text) {
    warnings.push_back({"sensitivity", "", "", std::move(text)});
  };
  const SensitivitySummary& s = job.sensitivity;
  if (s.num_replicates_unlinked > 0) {
    add(std::to_string(s.num_replicates_unlinked) + " of " + std::to_string(s.num_replicates) +
        " bootstrap replicates left some heading's regions unlinked; only the largest linked "
        "group had parities there");
  }
  if (s.num_replicates_imputed > 0) {
    add("in " + std::to_string(s.num_replicates_imputed) + " of " +
        std::to_string(s.num_replicates) +
        " bootstrap replicates a region lost a heading's parity and the heading's "
        "missing_parities rule filled it");
  }
  if (s.num_replicates_region_lost > 0) {
    add("in " + std::to_string(s.num_replicates_region_lost) + " of " +
        std::to_string(s.num_replicates) +
        " bootstrap replicates some region priced none of the items drawn in some heading and "
        "had no parity there; column num_replicates of bootstrap.csv says how many replicates "
        "each interval rests on");
  }
  for (const MethodRun& run : job.result.methods) {
    if (!run.message.empty()) add("method " + run.name + " failed: " + run.message);
  }
  return warnings;
}

// The pair intervals as the report's charts: the verdict matrix in rank
// order when every pair is known, and the verdicts of neighbours in rank.
std::vector<ReportSensitivity::PairChart> ToReportPairCharts(const SensitivityResult& result) {
  std::vector<ReportSensitivity::PairChart> charts;
  const int num_regions = static_cast<int>(result.parity.cols());
  for (const NodePairRatios& node : result.pair_ratios) {
    ReportSensitivity::PairChart chart;
    chart.node = node.node;
    chart.order = node.order;
    const size_t count = node.order.size();
    std::vector<int> position(num_regions, -1);
    for (size_t k = 0; k < count; ++k) position[node.order[k]] = static_cast<int>(k);
    auto value = [](const PairRatio& pair) {
      switch (pair.verdict) {
        case PairVerdict::kDearer:
          return 1.0;
        case PairVerdict::kCheaper:
          return -1.0;
        case PairVerdict::kIndistinguishable:
          return 0.0;
        case PairVerdict::kNone:
          break;
      }
      return std::nan("");
    };
    chart.neighbour_apart.assign(count > 0 ? count - 1 : 0, std::nan(""));
    if (node.all_pairs) chart.verdict.assign(count * count, std::nan(""));
    for (const PairRatio& pair : node.pairs) {
      const int i = position[pair.region_a], j = position[pair.region_b];
      const double v = value(pair);
      if (node.all_pairs) {
        chart.verdict[i * count + j] = v;
        chart.verdict[j * count + i] = -v;
      }
      if (std::abs(i - j) == 1 && std::isfinite(v)) {
        chart.neighbour_apart[std::min(i, j)] = v != 0.0 ? 1.0 : 0.0;
      }
    }
    charts.push_back(std::move(chart));
  }
  return charts;
}

// The full-sample computation, its outliers and plausibility checks: what
// compute would say about the same survey and settings.
struct FullSample {
  bool computed = false;
  ParityResult result;
  ComputeSummary summary;
  OutlierReport outliers;
  PlausibilityResult plausibility;
  int64_t num_gross_outliers = 0;
};

void ComputeFullSample(const RunConfig& config, const Survey& survey, FullSample* full) {
  ComputeOptions options = ComputeOptions::FromConfig(config);
  full->computed = ComputeParities(survey, options, &full->result, &full->summary);
  if (!full->computed) return;
  const OutlierOptions outlier_options = OutlierOptions::FromConfig(config);
  full->outliers = FindOutliers(survey, full->result, outlier_options);
  full->plausibility = CheckPlausibility(survey, full->result, config);
  full->num_gross_outliers =
      AddGrossOutlierWarnings(survey, full->outliers, config.checks, &full->plausibility);
}

// One table per part that was run.
std::vector<OutputFile> PartFiles(const SensitivityOptions& options,
                                  const SensitivityJobSummary& job) {
  std::vector<OutputFile> files;
  if (options.run_bootstrap) {
    files.push_back({"bootstrap.csv", BootstrapCsv(job.survey, job.result)});
    files.push_back({"items_needed.csv",
                     ItemsNeededCsv(job.survey,
                                    ItemsNeeded(job.survey, job.result, options.target_log_se),
                                    options.target_log_se)});
    files.push_back({"pair_ratios.csv", PairRatiosCsv(job.survey, job.result.pair_ratios)});
    if (options.write_replicates) {
      files.push_back({"replicates.bin", ReplicatesBinary(job.result)});
      files.push_back({"replicates_key.csv", ReplicatesKeyCsv(job.survey)});
    }
  }
  if (options.run_leave_one_out) {
    files.push_back({"leave_one_out.csv", LeaveOneOutCsv(job.survey, job.result)});
  }
  if (options.run_coverage) {
    files.push_back({"coverage_curve.csv", CoverageCurveCsv(job.survey, job.result)});
  }
  if (options.run_methods) {
    files.push_back({"method_spread.csv", MethodSpreadCsv(job.survey, job.result)});
  }
  return files;
}

// The sensitivity run's own report: the parities of its full sample with
// the intervals, the coverage curve and the method spread (the compute
// report beside it is never redrawn); nothing when the full computation
// fails.
void AddReport(const RunConfig& config, const SensitivityOptions& options,
               const SensitivityJobSummary& job, const FullSample& full_sample,
               std::vector<OutputFile>* files) {
  const ParityResult& full = full_sample.result;
  const ComputeSummary& full_summary = full_sample.summary;
  const std::vector<ReportOutlier> outliers = ToReportOutliers(job.survey, full_sample.outliers);
  const ReportSensitivity sensitivity = ToReportSensitivity(job.result, options);
  ReportInputs report;
  report.config = &config;
  report.survey = &job.survey;
  report.load = &job.load;
  report.result = &full;
  report.compute = &full_summary;
  report.warnings = job.warnings;
  report.plausibility = &full_sample.plausibility;
  report.outliers = &outliers;
  report.num_cells_not_screenable = full_sample.outliers.num_cells_not_screenable;
  report.sensitivity = &sensitivity;
  files->push_back({"report.html", ReportHtml(report)});
}

std::string RunJson(const RunConfig& config, const SensitivityOptions& options,
                    const SensitivityJobSummary& job, const std::vector<OutputFile>& files,
                    const std::string& compute_run_section) {
  const SensitivitySummary& s = job.sensitivity;
  RunRecord record;
  record.command = "sensitivity";
  record.run_id = job.run_id;
  record.output_digests = DigestOutputs(files);
  record.config = &config;
  record.load = &job.load;
  record.survey = &job.survey;
  record.compute = &s.full_sample;
  record.outcome = job.exit_code == 0 ? "ok" : "warnings under strict mode";
  record.message = job.exit_code == 0 ? s.BriefReport() : job.message;
  record.exit_code = job.exit_code;
  for (const RunWarning& w : job.warnings) record.warnings.push_back(w.text);
  record.warning_counts = CountWarnings(job.warnings);
  record.outputs = job.outputs;
  record.stages = {{"read", job.load.read_seconds},
                   {"cells", job.load.cells_seconds},
                   {"full sample", s.full_sample_seconds},
                   {"bootstrap", s.bootstrap_seconds},
                   {"leave-one-out", s.leave_one_out_seconds},
                   {"coverage", s.coverage_seconds},
                   {"methods", s.methods_seconds}};
  record.sections.push_back({"sensitivity", SensitivityRecordSection(options, s, job.result, &job.survey)});
  if (!compute_run_section.empty()) record.sections.push_back({"compute_run", compute_run_section});
  return RunRecordJson(record);
}

// Links this run to the compute run in the output folder, if any: its id, and
// whether it rests on the same inputs and settings. A mismatch is a warning
// (and deflate --interval refuses the pair).
std::string LinkComputeRun(const RunConfig& config, const std::string& this_json,
                           SensitivityJobSummary* job) {
  std::string id, json, error;
  if (!ReadRunRecord(config.output, &id, &json, &error)) return "";
  const std::vector<std::string> differences = RunDifferences(this_json, json);
  nlohmann::ordered_json link = {{"run_id", id}, {"same_inputs_and_settings", differences.empty()},
                                 {"differences", differences}};
  if (!differences.empty()) {
    job->warnings.push_back({"sensitivity", "", "",
                             "the compute run in " + config.output + " (run " + id +
                                 ") rests on other inputs or settings, so its parities and these "
                                 "intervals do not belong together: " +
                                 JoinNames(differences, "; ")});
  }
  return link.dump(-1, ' ', false, nlohmann::ordered_json::error_handler_t::replace);
}

}  // namespace

std::string SensitivityRecordSection(const SensitivityOptions& options,
                                     const SensitivitySummary& summary,
                                     const SensitivityResult& result, const Survey* survey) {
  nlohmann::ordered_json j;
  j["settings"] = RecordSettings(options);
  j["counts"] = RecordCounts(summary);
  j["seconds"] = RecordSeconds(summary);
  // The curve in one line per level: median over regions of the root's spread.
  nlohmann::ordered_json curve = nlohmann::ordered_json::array();
  for (const CoverageLevel& level : result.coverage) {
    const std::vector<double> sd = SortedFiniteRoot(level.log_sd);
    nlohmann::ordered_json row;
    row["coverage"] = level.coverage;
    row["root_median_log_sd"] = sd.empty() ? nlohmann::ordered_json(nullptr)
                                           : nlohmann::ordered_json(PercentileType7(sd, 0.5));
    curve.push_back(row);
  }
  j["coverage_curve"] = curve;
  // Per node of pair_ratios.csv: pairs computed and pairs told apart.
  nlohmann::ordered_json pairs = nlohmann::ordered_json::array();
  for (const NodePairRatios& node : result.pair_ratios) {
    int apart = 0;
    for (const PairRatio& pair : node.pairs) apart += pair.ExcludesOne() ? 1 : 0;
    const nlohmann::ordered_json code =
        survey != nullptr ? nlohmann::ordered_json(survey->classification.nodes()[node.node].code)
                          : nlohmann::ordered_json(node.node);
    pairs.push_back({{"node", code},
                     {"all_pairs", node.all_pairs},
                     {"num_pairs", node.pairs.size()},
                     {"num_told_apart", apart}});
  }
  j["pair_ratios"] = pairs;
  nlohmann::ordered_json failed = nlohmann::ordered_json::array();
  for (const MethodRun& run : result.methods) {
    if (!run.message.empty()) failed.push_back({{"method", run.name}, {"message", run.message}});
  }
  j["failed_method_runs"] = failed;
  return j.dump(2, ' ', false, nlohmann::ordered_json::error_handler_t::replace);
}

std::string SensitivityJobSummary::FullReport(const SensitivityOptions& options) const {
  std::string out = "survey: " + std::to_string(survey.num_regions()) + " regions, " +
                    std::to_string(survey.num_items()) + " items, " +
                    std::to_string(survey.num_headings()) + " basic headings\n";
  out += sensitivity.BriefReport() + "\n";
  if (result.parity.rows() == 0) return out;
  const int node =
      options.node.empty() ? 0 : std::max(0, survey.classification.FindNode(options.node));
  out += "\nsensitivity of " + NodeTitle(survey.classification, node) + ", dearest first:\n";
  out += SensitivityTable(survey, result, options);
  out += Notes(*this, options);
  if (options.run_bootstrap) {
    const std::string items = ItemsNeededSummary(
        survey, ItemsNeeded(survey, result, options.target_log_se), options.target_log_se);
    if (!items.empty()) out += "\n" + items;
  }
  out +=
      "\nThe bootstrap and leave-one-out runs show how much the parities depend on which items "
      "were priced; they do not measure errors shared by all items (unit or quality "
      "mismatches).\n";
  return out;
}

ReportSensitivity ToReportSensitivity(const SensitivityResult& result,
                                      const SensitivityOptions& options) {
  ReportSensitivity out;
  if (result.boot_lower.rows() > 0) {
    for (Eigen::Index r = 0; r < result.boot_lower.cols(); ++r) {
      out.parity_lower.push_back(result.boot_lower(0, r));
      out.parity_upper.push_back(result.boot_upper(0, r));
    }
    // The kind is named, since the expanded interval is wider than the
    // percentiles at the level would be.
    out.interval_label = FormatShareAsPercent(options.level) + " % " +
                         (options.interval == IntervalKind::kExpanded ? "expanded percentile"
                                                                      : "percentile") +
                         " interval over item resamples";
  }
  out.pair_charts = ToReportPairCharts(result);
  out.pair_level_label = FormatShareAsPercent(options.level) + " %";
  for (const CoverageLevel& level : result.coverage) {
    const std::vector<double> changes = SortedFiniteRoot(level.median_abs_log_change);
    if (changes.empty()) continue;
    ReportSensitivity::CoveragePoint point;
    point.coverage_share = level.coverage;
    point.median_spread_pct = 100.0 * PercentileType7(changes, 0.5);
    out.coverage_curve.push_back(point);
  }
  for (const MethodRun& run : result.methods) {
    if (run.parity.rows() == 0) continue;
    out.method_names.push_back(run.name);
    out.method_parity.emplace_back();
    for (Eigen::Index r = 0; r < run.parity.cols(); ++r) {
      out.method_parity.back().push_back(run.parity(0, r));
    }
  }
  return out;
}

std::string SensitivityFolder(const RunConfig& config) {
  return (std::filesystem::path(config.output) / "sensitivity").string();
}

int RunSensitivityJob(const RunConfig& config, const SensitivityOptions& options,
                      SensitivityJobSummary* summary, const JobOutputOptions& output) {
  *summary = SensitivityJobSummary();
  auto fail = [&](int code, const std::string& message) {
    summary->exit_code = code;
    summary->message = message;
    return code;
  };
  std::string error;
  if (!options.IsValid(&error)) return fail(1, error);
  PathGuard guard = GuardInputsOf(config);
  if (output.write_files) guard.AddOutputFolder(SensitivityFolder(config), "sensitivity folder");
  if (!guard.Check(&error)) return fail(1, error);
  LoadOptions load_options;
  load_options.invalid_rows = config.invalid_rows;
  load_options.num_threads = config.threads;
  if (!LoadSurvey(config, load_options, &summary->survey, &summary->load)) {
    return fail(1, summary->load.message);
  }
  if (!options.node.empty() && summary->survey.classification.FindNode(options.node) < 0) {
    const Classification& tree = summary->survey.classification;
    const std::string nearest = NearestName(options.node, tree.NodeCodes());
    return fail(1, "node '" + options.node + "' is not in the classification" +
                       (nearest.empty() ? "" : "; did you mean '" + nearest + "'?"));
  }
  const ComputeOptions compute = ComputeOptions::FromConfig(config);
  SensitivityOptions run_options = options;
  if (run_options.num_threads == 0) run_options.num_threads = config.threads;
  if (!RunSensitivity(summary->survey, compute, run_options, &summary->result,
                      &summary->sensitivity)) {
    const SensitivityOutcome outcome = summary->sensitivity.outcome;
    return fail(outcome == SensitivityOutcome::kComputationFailed ||
                        outcome == SensitivityOutcome::kCancelled
                    ? 2
                    : 1,
                summary->sensitivity.message);
  }
  FullSample full_sample;
  ComputeFullSample(config, summary->survey, &full_sample);
  summary->warnings = JobWarnings(*summary, full_sample.plausibility);
  summary->run_id = NewRunId();
  const std::string link =
      LinkComputeRun(config, RunJson(config, run_options, *summary, {}, ""), summary);
  std::vector<OutputFile> files = PartFiles(run_options, *summary);
  if (config.invalid_rows == InvalidRowPolicy::kSkip) {
    files.push_back({"rejected.csv", RejectedRowsCsv(summary->load.rejected_rows)});
  }
  files.push_back({"warnings.csv", WarningsCsv(summary->warnings)});
  if (config.report && full_sample.computed) {
    AddReport(config, run_options, *summary, full_sample, &files);
  }
  for (const OutputFile& file : files) summary->outputs.push_back(file.relative_path);
  summary->outputs.push_back("run.json");
  // The exit code is settled before run.json, which records it.
  const bool strict_fails = config.strict && !summary->warnings.empty();
  summary->exit_code = strict_fails ? kExitStrictWarnings : kExitOk;
  summary->message = strict_fails ? StrictModeMessage(summary->warnings) : "ok";
  files.push_back({"run.json", RunJson(config, run_options, *summary, files, link)});
  RunFolderSummary written;
  if (output.write_files && !WriteRunFolder(SensitivityFolder(config), files, &written, &error)) {
    return fail(1, error);
  }
  summary->files = std::move(files);
  return summary->exit_code;
}

}  // namespace paritas
