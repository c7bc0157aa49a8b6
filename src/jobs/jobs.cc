// The check and compute jobs. They only sequence library stages and collect
// what the user must see; every number comes from the stages themselves.
#include "paritas/jobs/jobs.h"

#include "paritas/jobs/guards.h"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <deque>
#include <future>
#include <optional>

#include "paritas/aggregation/bilateral_matrix.h"
#include "paritas/aggregation/normalisation.h"
#include "paritas/elementary/elementary.h"
#include "paritas/output/output_writers.h"
#include "paritas/output/report.h"
#include "output/format_rows.h"
#include "paritas/use/heading_contributions.h"
#include "paritas/base/text.h"

namespace paritas {
namespace {

LoadOptions LoadOptionsFor(const RunConfig& config) {
  LoadOptions options;
  options.invalid_rows = config.invalid_rows;
  options.num_threads = config.threads;
  return options;
}

std::string Codes(const Survey& survey, const std::vector<int>& regions, size_t limit = 8) {
  std::vector<std::string> codes;
  for (size_t k = 0; k < regions.size() && k < limit; ++k) codes.emplace_back(survey.regions.Code(regions[k]));
  std::string text = JoinNames(codes);
  if (regions.size() > limit) text += ", ... (" + std::to_string(regions.size()) + ")";
  return text;
}

std::string Pad(const std::string& text, size_t width, bool right = false) {
  if (text.size() >= width) return text;
  return right ? std::string(width - text.size(), ' ') + text : text + std::string(width - text.size(), ' ');
}

std::string FilesReport(const LoadSummary& load) {
  std::string out = "files:\n";
  for (const InputFileSummary& file : load.files) {
    if (!file.given) continue;
    out += "  " + Pad(file.role, 12) + file.path + ": " + FormatCount(file.rows_read) +
           " rows read, " + FormatCount(file.rows_used) + " used, " +
           FormatCount(file.rows_rejected) + " rejected";
    if (file.rows_rejected_by_cascade > 0) {
      out += " (" + FormatCount(file.rows_rejected_by_cascade) +
             " of them of rejected regions or items)";
    }
    out += "\n";
    if (!file.columns.empty()) {
      std::vector<std::string> mapped;
      for (const auto& [ours, header] : file.columns) {
        mapped.push_back(ours + " from " + QuoteValue(header));
      }
      out += "  " + Pad("", 12) + "columns: " + JoinNames(mapped) + "\n";
    }
    if (!file.ignored_columns.empty()) {
      // A header of garbage can hold a million names: list the first few.
      constexpr size_t kMaxListed = 20;
      const std::vector<std::string>& names = file.ignored_columns;
      std::string listed = JoinNames(std::vector<std::string>(names.begin(), names.begin() + std::min(names.size(), kMaxListed)));
      if (names.size() > kMaxListed) listed += ", ... (" + FormatCount(static_cast<int64_t>(names.size())) + " in all)";
      out += "  " + Pad("", 12) + "ignored columns: " + listed + "\n";
    }
  }
  return out;
}

std::string SurveyCounts(const Survey& survey) {
  int aggregates = 0, groups = 0;
  for (const auto& node : survey.classification.nodes()) {
    groups += node.is_group ? 1 : 0;
    aggregates += node.is_leaf || node.is_group ? 0 : 1;
  }
  return "survey: " + FormatCount(survey.num_regions()) + " regions, " +
         FormatCount(survey.num_items()) + " items, " + FormatCount(survey.num_headings()) +
         " basic headings in " + FormatCount(aggregates) + " aggregate" +
         (aggregates == 1 ? "" : "s") +
         (groups > 0 ? " and " + FormatCount(groups) + " group" + (groups == 1 ? "" : "s") : "") +
         ", " + FormatCount(survey.num_quotes) + " quotes in " +
         FormatCount(static_cast<int64_t>(survey.cells.size())) + " cells\n";
}

}  // namespace

std::string DescribeRejectedRows(const LoadSummary& load, size_t limit) {
  return load.DescribeRejections(limit);
}

bool ResolveMatrixNodes(const Classification& tree, const std::vector<std::string>& codes,
                        std::vector<int>* nodes, std::string* error) {
  nodes->clear();
  if (codes.empty()) {
    nodes->push_back(0);
    return true;
  }
  if (MatricesMeanEveryNode(codes)) {
    for (int n = 0; n < static_cast<int>(tree.nodes().size()); ++n) nodes->push_back(n);
    return true;
  }
  for (const std::string& code : codes) {
    const int node = tree.FindNode(code);
    if (node < 0) {
      *error = "matrices: node '" + code + "' is not in the classification";
      const std::string nearest = NearestName(code, tree.NodeCodes());
      if (!nearest.empty()) *error += "; did you mean '" + nearest + "'?";
      return false;
    }
    if (std::find(nodes->begin(), nodes->end(), node) == nodes->end()) nodes->push_back(node);
  }
  return true;
}

namespace {

// What compute computes with: the nodes whose tables it writes and whose
// bilaterals it keeps (their spreads are checked), none beyond
// matrices_up_to_regions unless asked for, where the root's spreads come by
// row blocks (no region x region matrix). Check computes the same way, so
// that it warns as compute would. Fails only on an unknown node in matrices.
struct ComputePlan {
  std::vector<int> matrix_nodes;
  bool matrices_left_out = false;
  ComputeOptions options;
};

bool PlanCompute(const RunConfig& config, const Survey& survey, ComputePlan* plan, std::string* error) {
  if (!ResolveMatrixNodes(survey.classification, config.matrices, &plan->matrix_nodes, error)) return false;
  if (config.matrices.empty() && survey.num_regions() > config.matrices_up_to_regions) {
    plan->matrix_nodes.clear();  // the root's spreads are still computed (plausibility, report)
    plan->matrices_left_out = true;
  }
  plan->options = ComputeOptions::FromConfig(config);
  plan->options.elementary.keep_cell_fitted = false;  // no file reads it
  plan->options.keep_bilaterals = plan->matrix_nodes;
  plan->options.keep_root_bilaterals = !plan->matrices_left_out;
  return true;
}

}  // namespace

// ---------------------------------------------------------------------------
// check

int RunCheck(const RunConfig& config, CheckSummary* summary) {
  *summary = CheckSummary();
  if (!LoadSurvey(config, LoadOptionsFor(config), &summary->survey, &summary->load)) {
    summary->message = summary->load.message;
    summary->exit_code = kExitInvalidInput;
    return summary->exit_code;
  }
  const Survey& survey = summary->survey;
  for (int h = 0; h < survey.num_headings(); ++h) {
    HeadingCheck check;
    check.heading = h;
    const HeadingRange& range = survey.heading_range[h];
    check.num_items_listed = range.num_items();
    check.num_cells = range.num_cells();
    std::vector<int> items_seen(range.num_items(), 0);
    std::vector<int> region_cells(survey.num_regions(), 0);
    for (int64_t k = range.cell_begin; k < range.cell_end; ++k) {
      region_cells[survey.cells.region[k]] += 1;
      items_seen[survey.cells.item[k] - range.item_begin] = 1;
      check.num_quotes += survey.cells.num_quotes[k];
    }
    for (int seen : items_seen) check.num_items_priced += seen;
    for (int r = 0; r < survey.num_regions(); ++r) {
      if (region_cells[r] > 0) {
        ++check.num_regions_priced;
        const double e = survey.expenditure(r, h);
        if (std::isnan(e)) check.regions_without_expenditure.push_back(r);
      } else {
        check.regions_without_prices.push_back(r);
      }
    }
    const double possible = static_cast<double>(check.num_regions_priced) * check.num_items_priced;
    check.fill_share = possible > 0 ? check.num_cells / possible : 0.0;
    if (check.num_cells > 0) check.groups = HeadingRegionGroups(survey, h);
    if (check.groups.size() > 1) ++summary->num_unlinked_headings;
    summary->headings.push_back(std::move(check));
  }
  // What compute would refuse, check refuses with the same message.
  std::string compute_problem;
  if (summary->num_unlinked_headings == 0) {
    // Outlier screening needs the parities; they are cheap next to reading.
    ParityResult result;
    ComputeSummary compute;
    ComputePlan plan;
    const bool planned = PlanCompute(config, survey, &plan, &compute_problem);
    plan.options.keep_pair_spreads = false;  // for the report, which check does not write
    plan.options.spread_medians = false;
    const bool computed = planned && ComputeParities(survey, plan.options, &result, &compute);
    if (!computed && compute_problem.empty()) compute_problem = compute.message;
    if (computed) {
      const OutlierOptions outlier_options = OutlierOptions::FromConfig(config);
      summary->outlier_threshold = config.outlier_threshold;
      const OutlierReport report = FindOutliers(survey, result, outlier_options);
      for (HeadingCheck& check : summary->headings) check.num_flagged_cells = report.num_flagged_cells[check.heading];
      // The warnings compute will raise on the same survey and settings.
      PlausibilityResult plausibility = CheckPlausibility(survey, result, config);
      AddGrossOutlierWarnings(survey, report, config.checks, &plausibility);
      summary->compute_warnings = CollectWarnings(summary->load, compute.warnings, plausibility);
      summary->compute_warnings_known = true;
    }
  }
  summary->usable = summary->num_unlinked_headings == 0 && compute_problem.empty();
  summary->exit_code = summary->usable ? kExitOk : kExitInvalidInput;
  summary->message =
      summary->usable ? "the survey is usable"
      : !compute_problem.empty()
          ? compute_problem
          : std::to_string(summary->num_unlinked_headings) +
                " heading(s) have unlinked regions: parities are not identified there";
  return summary->exit_code;
}

std::string CheckSummary::FullReport() const {
  std::string out;
  // A failed load's rejected rows go to standard error with its message (as
  // for compute), so the report names only the files.
  if (load.outcome != LoadOutcome::kOk) return FilesReport(load);
  out += SurveyCounts(survey);
  out += FilesReport(load);
  size_t width = 7;
  for (const std::string& code : survey.heading_codes) width = std::max(width, code.size());
  out += "headings:\n  " + Pad("heading", width) + "  " + Pad("regions", 9, true) + "  " +
         Pad("items", 7, true) + "  " + Pad("filled", 7, true) + "  " + Pad("quotes", 9, true) + "  " + Pad("flagged", 7, true) + "  linked\n";
  for (const HeadingCheck& h : headings) {
    const std::string linked = h.num_cells == 0 ? "no prices"
                               : h.groups.size() == 1 ? "yes"
                                                      : "NO: " + std::to_string(h.groups.size()) + " groups";
    out += "  " + Pad(survey.heading_codes[h.heading], width) + "  " +
           Pad(std::to_string(h.num_regions_priced) + "/" + std::to_string(survey.num_regions()), 9, true) +
           "  " + Pad(std::to_string(h.num_items_priced), 7, true) + "  " +
           Pad(FormatFixed(100.0 * h.fill_share, 1) + " %", 7, true) + "  " +
           Pad(FormatCount(h.num_quotes), 9, true) + "  " +
           Pad(h.num_flagged_cells < 0 ? "-" : std::to_string(h.num_flagged_cells), 7, true) + "  " +
           linked + "\n";
  }
  bool any = false;
  for (const HeadingCheck& h : headings) {
    if (h.groups.size() <= 1) continue;
    if (!any) out += "unlinked regions (parities not identified):\n";
    any = true;
    std::string groups;
    for (size_t g = 0; g < h.groups.size(); ++g) {
      groups += (g ? (g + 1 == h.groups.size() ? " and " : ", ") : "") + std::string("{") +
                Codes(survey, h.groups[g]) + "}";
    }
    out += "  " + survey.heading_codes[h.heading] + ": " + groups + "\n";
  }
  std::string no_prices, no_spending;
  for (const HeadingCheck& h : headings) {
    if (!h.regions_without_prices.empty() && h.num_cells > 0) {
      no_prices += "  " + survey.heading_codes[h.heading] + ": " + Codes(survey, h.regions_without_prices) + "\n";
    }
    if (!h.regions_without_expenditure.empty()) {
      no_spending += "  " + survey.heading_codes[h.heading] + ": " +
                     Codes(survey, h.regions_without_expenditure) + "\n";
    }
  }
  if (!no_prices.empty()) out += "regions with no prices in a heading:\n" + no_prices;
  if (!no_spending.empty()) out += "regions with prices but no expenditure row in a heading:\n" + no_spending;
  std::string empty;
  for (const HeadingCheck& h : headings) {
    if (h.num_cells == 0) empty += (empty.empty() ? "" : ", ") + survey.heading_codes[h.heading];
  }
  if (!empty.empty()) out += "headings with no prices (left out of every aggregate): " + empty + "\n";
  int flagged = 0;
  for (const HeadingCheck& h : headings) flagged += std::max(h.num_flagged_cells, 0);
  out += "outliers: " + FormatCount(flagged) + " cells flagged (|standardised residual| > " +
         FormatFixed(outlier_threshold, 1) + "; listed in outliers.csv by compute)\n";
  out += "rejected rows: " + FormatCount(load.num_rows_rejected) + "\n";
  if (load.num_rows_rejected > 0) out += DescribeRejectedRows(load);
  if (compute_warnings_known) {
    out += compute_warnings.empty() ? "compute will raise no warnings\n"
                                    : "compute will raise " + WarningsText(compute_warnings);
  }
  out += std::string(usable ? "usable: " : "not usable: ") + message + "\n";
  return out;
}

// ---------------------------------------------------------------------------
// compute

namespace {

// The run record of a successful compute, with the digest of every file
// written before it.
std::string ComputeRunJson(const RunConfig& config, const ComputeJobSummary& summary,
                           const std::vector<OutputDigest>& digests) {
  RunRecord record;
  record.command = "compute";
  record.run_id = summary.run_id;
  record.output_digests = digests;
  record.config = &config;
  record.load = &summary.load;
  record.survey = &summary.survey;
  record.compute = &summary.compute;
  record.outcome = summary.exit_code == kExitOk ? "ok" : "warnings under strict mode";
  record.message = summary.exit_code == kExitOk ? summary.compute.BriefReport() : summary.message;
  record.exit_code = summary.exit_code;
  for (const RunWarning& w : summary.warnings) record.warnings.push_back(w.text);
  record.warning_counts = CountWarnings(summary.warnings);
  record.outputs = summary.outputs;
  record.stages = summary.stages;
  record.sections.push_back(
      {"missing_parities", MissingParitiesRecordJson(summary.survey, summary.result)});
  return RunRecordJson(record);
}

// Where the files of a compute run go as they are made: block by block into
// the run folder's writer (null: nothing is written), and whole into the
// list handed back when the texts are kept.
class ComputeFileSink {
 public:
  ComputeFileSink(RunFolderWriter* writer, bool keep_texts) : writer_(writer), keep_texts_(keep_texts || !writer) {}

  // A file whose text is made whole.
  void Add(const std::string& path, std::string text) {
    files_.push_back({path, keep_texts_ ? std::move(text) : std::string()});
    if (!Begin(path)) return;
    if (keep_texts_) {
      writer_->AppendUnowned(files_.back().contents);  // the deque keeps it in place
    } else {
      writer_->Append(std::move(text));
    }
  }
  // A file made block by block: `make(emit)` hands the blocks to `emit`.
  void AddBlocks(const std::string& path, const std::function<void(const TextBlocks&)>& make) {
    if (keep_texts_) {
      internal::JoinedText text;
      make(text.Sink());
      Add(path, text.Take());
      return;
    }
    files_.push_back({path, std::string()});
    if (!Begin(path)) return;
    make([this](std::string block) { writer_->Append(std::move(block)); });
  }
  // The first path the run folder refused ("" when none).
  const std::string& error() const { return error_; }
  // Every file added, in order; call once the writer has finished.
  std::vector<OutputFile> TakeFiles() {
    return std::vector<OutputFile>(std::make_move_iterator(files_.begin()),
                                   std::make_move_iterator(files_.end()));
  }

 private:
  bool Begin(const std::string& path) {
    if (writer_ == nullptr || !error_.empty()) return false;
    return writer_->BeginFile(path, &error_);
  }

  RunFolderWriter* writer_;
  bool keep_texts_;
  std::deque<OutputFile> files_;
  std::string error_;
};

// The parity matrix and bilateral table of each node asked for, one file
// at a time, each handed to the sink block by block: on a survey of 1,000
// regions a heading's two files are about 50 MB of text, and holding every
// node's at once grew the run's peak by that much per node. A heading's
// all-pairs Jevons matrix lives while its table is written.
void AddMatrixFiles(const Survey& survey, const ParityResult& result, const std::vector<int>& matrix_nodes,
                    ComputeFileSink* sink) {
  for (int node : matrix_nodes) {
    const NodeResult& n = result.nodes[node];
    const std::string name = NodeFileName(survey.classification.nodes()[node].code) + ".csv";
    sink->AddBlocks("matrix/" + name, [&](const TextBlocks& emit) { ParityMatrixCsvBlocks(survey, n, emit); });
    sink->AddBlocks("bilateral/" + name, [&](const TextBlocks& emit) {
      if (!n.is_heading) {
        AggregateBilateralCsvBlocks(survey, n, result.bilaterals[node], emit);
        return;
      }
      Eigen::MatrixXd log_price, present;
      HeadingPriceArrays(survey, n.heading, &log_price, &present);
      Eigen::MatrixXi num_items;
      const Eigen::MatrixXd jevons = AllPairsJevons(log_price, present, &num_items);
      HeadingBilateralCsvBlocks(survey, n, jevons, num_items, emit);
    });
  }
}

ReportInputs ComputeReportInputs(const RunConfig& config, const ContributionTable& contributions,
                                 const std::vector<ReportOutlier>& report_outliers,
                                 const ComputeJobSummary& summary) {
  ReportInputs report;
  report.outliers = &report_outliers;
  report.num_cells_not_screenable = summary.outliers.num_cells_not_screenable;
  report.config = &config;
  report.survey = &summary.survey;
  report.load = &summary.load;
  report.result = &summary.result;
  report.compute = &summary.compute;
  report.warnings = summary.warnings;
  report.plausibility = &summary.plausibility;
  report.contributions = &contributions;
  report.explain_region = config.report_region;
  report.root_spreads = &summary.root_spreads;
  report.pair_tables_written = !summary.matrices_left_out;
  return report;
}

// Makes every file of a compute run but run.json, in the order they are
// listed, into `sink`. The report is built on a thread of its own beside the
// tables (it only reads what they read).
void MakeComputeOutputFiles(const RunConfig& config, const std::vector<int>& matrix_nodes,
                            const ContributionTable& contributions, const ComputeJobSummary& summary,
                            ComputeFileSink* sink) {
  const Survey& survey = summary.survey;
  const ParityResult& result = summary.result;
  const std::vector<ReportOutlier> report_outliers = ToReportOutliers(survey, summary.outliers);
  std::future<std::string> report;
  if (config.report) {
    report = std::async(std::launch::async, [&]() {
      return ReportHtml(ComputeReportInputs(config, contributions, report_outliers, summary));
    });
  }
  sink->AddBlocks("parities.csv", [&](const TextBlocks& emit) {
    ParitiesCsvBlocks(survey, result, &summary.plausibility, "", emit);
  });
  sink->AddBlocks("contributions.csv",
                  [&](const TextBlocks& emit) { ContributionsCsvBlocks(survey, contributions, emit); });
  sink->Add("warnings.csv", WarningsCsv(summary.warnings));
  if (const AggregationMethod* method = FindAggregationMethod(config.aggregation);
      method != nullptr && method->Properties().additive) {
    sink->Add("real_by_heading.csv", RealByHeadingCsv(survey, result, *method));
  }
  if (const ElementaryMethod* method = FindElementaryMethod(config.elementary);
      method != nullptr && method->Properties().gives_representativity_effect) {
    sink->Add("representativity.csv", RepresentativityCsv(survey, result));
  }
  AddMatrixFiles(survey, result, matrix_nodes, sink);
  for (const NodeResult& n : result.nodes) {  // spanning-tree: every aggregate's tree
    if (n.tree.empty()) continue;
    const std::string& code = survey.classification.nodes()[n.node].code;
    sink->Add("tree/" + NodeFileName(code) + ".csv", TreeCsv(survey, n));
  }
  sink->AddBlocks("outliers.csv",
                  [&](const TextBlocks& emit) { OutliersCsvBlocks(survey, summary.outliers, emit); });
  sink->AddBlocks("dispersion.csv",
                  [&](const TextBlocks& emit) { DispersionCsvBlocks(survey, summary.outliers, emit); });
  if (config.invalid_rows == InvalidRowPolicy::kSkip) {
    sink->Add("rejected.csv", RejectedRowsCsv(summary.load.rejected_rows));
  }
  if (config.report) sink->Add("report.html", report.get());
}

}  // namespace

int RunCompute(const RunConfig& config, ComputeJobSummary* summary,
               const JobOutputOptions& output) {
  // Each stage is timed from where the one before it stopped, so their sum
  // is the wall time of the whole job up to run.json (README "Benchmarks").
  auto mark = std::chrono::steady_clock::now();
  auto lap = [&mark]() {
    const auto now = std::chrono::steady_clock::now();
    const double seconds = std::chrono::duration<double>(now - mark).count();
    mark = now;
    return seconds;
  };
  *summary = ComputeJobSummary();
  auto fail = [&](int code, const std::string& message) {
    summary->exit_code = code;
    summary->message = message;
    return code;
  };
  std::string error;
  PathGuard guard = GuardInputsOf(config);
  if (output.write_files) guard.AddOutputFolder(config.output, "output folder");
  if (!guard.Check(&error)) return fail(kExitInvalidInput, error);
  if (!LoadSurvey(config, LoadOptionsFor(config), &summary->survey, &summary->load)) {
    return fail(kExitInvalidInput, summary->load.message);
  }
  // The path checks before the load count as reading.
  const double load_seconds = lap();
  summary->stages.push_back({"read", load_seconds - summary->load.cells_seconds});
  summary->stages.push_back({"cells", summary->load.cells_seconds});
  const Survey& survey = summary->survey;

  ComputePlan plan;
  if (!PlanCompute(config, survey, &plan, &error)) return fail(kExitInvalidInput, error);
  const std::vector<int>& matrix_nodes = plan.matrix_nodes;
  if (plan.matrices_left_out) {
    summary->matrices_left_out = true;
    summary->matrices_up_to_regions = config.matrices_up_to_regions;
  }
  if (!config.report_region.empty() && survey.regions.Find(config.report_region) < 0) {
    std::string message = "report_region '" + config.report_region + "' is not in the survey";
    const std::string nearest = NearestName(config.report_region, survey.regions.Codes());
    if (!nearest.empty()) message += "; did you mean '" + nearest + "'?";
    return fail(kExitInvalidInput, message);
  }
  ComputeOptions& options = plan.options;
  options.keep_pair_spreads = config.report;
  options.spread_medians = config.report;
  if (!ComputeParities(survey, options, &summary->result, &summary->compute)) {
    const int code = summary->compute.outcome == ComputeOutcome::kComputationFailed ? kExitComputationFailed
                                                                                    : kExitInvalidInput;
    return fail(code, summary->compute.message);
  }
  // The settings resolved before the parities count as elementary.
  const double compute_seconds = lap();
  summary->stages.push_back({"elementary", compute_seconds - summary->compute.aggregation_seconds});
  summary->stages.push_back({"aggregation", summary->compute.aggregation_seconds});
  const ParityResult& result = summary->result;
  const OutlierOptions outlier_options = OutlierOptions::FromConfig(config);
  summary->outliers = FindOutliers(survey, result, outlier_options);
  summary->stages.push_back({"outliers", lap()});
  summary->plausibility = CheckPlausibility(survey, result, config);
  summary->num_gross_outliers =
      AddGrossOutlierWarnings(survey, summary->outliers, config.checks, &summary->plausibility);
  summary->warnings =
      CollectWarnings(summary->load, summary->compute.warnings, summary->plausibility);
  summary->stages.push_back({"checks", lap()});

  // Each heading's part in each region's ln parity (contributions.csv, report).
  const ContributionTable contributions =
      HeadingContributions(survey, result, options.reference, options.num_threads);
  summary->stages.push_back({"contributions", lap()});

  // Outputs, written whole or not at all. The write stage runs from here to
  // the moment run.json is formatted: every other file is then formatted,
  // digested and in the staging folder.
  if (!result.bilaterals.empty() && result.bilaterals.front().laspeyres.rows() > 0) {
    summary->root_spreads = RegionSpreads(result.bilaterals.front());
  } else {
    summary->root_spreads = result.root_spreads.regions;
  }
  // The exit code is settled before run.json, which records it.
  const bool strict_fails =
      config.strict && (!summary->warnings.empty() || summary->num_gross_outliers > 0);
  summary->exit_code = strict_fails ? kExitStrictWarnings : kExitOk;
  summary->message = strict_fails ? StrictModeMessage(summary->warnings) : "ok";
  summary->run_id = NewRunId();

  // Each file goes to the run folder's writer as it is made (block by block
  // for the large tables), so the copies into the page cache and the digests
  // run beside the formatting of what follows.
  std::optional<RunFolderWriter> writer;
  if (output.write_files) {
    writer.emplace();
    if (!writer->Open(config.output, /*digest=*/true, &error)) return fail(kExitInvalidInput, error);
  }
  ComputeFileSink sink(writer ? &*writer : nullptr, output.keep_texts);
  MakeComputeOutputFiles(config, matrix_nodes, contributions, *summary, &sink);
  if (!sink.error().empty()) {
    writer.reset();  // stops its thread before the sink's texts go
    return fail(kExitInvalidInput, sink.error());
  }
  std::vector<OutputDigest> digests;
  if (writer && !writer->Finish(&digests, &error)) return fail(kExitInvalidInput, error);
  std::vector<OutputFile> files = sink.TakeFiles();
  if (!writer) digests = DigestOutputs(files);
  for (const OutputFile& file : files) summary->outputs.push_back(file.relative_path);
  summary->outputs.push_back("run.json");
  summary->stages.push_back({"write", lap()});
  OutputFile record{"run.json", ComputeRunJson(config, *summary, digests)};
  RunFolderSummary written;
  if (writer && !writer->Commit(&record, &written, &error)) return fail(kExitInvalidInput, error);
  files.push_back(std::move(record));
  summary->files = std::move(files);
  return summary->exit_code;
}

namespace {

// One line per analytic group: its headings and the range of its parities.
std::string GroupLines(const Survey& survey, const ParityResult& result) {
  const Classification& tree = survey.classification;
  const int num_nodes = static_cast<int>(tree.nodes().size());
  if (tree.num_tree_nodes() >= num_nodes) return "";
  std::string out = "\ngroups (each normalised on its own; every region in parities.csv):\n";
  for (int n = tree.num_tree_nodes(); n < num_nodes; ++n) {
    const NodeResult& node = result.nodes[n];
    int low = -1, high = -1;
    for (int r = 0; r < node.parity.size(); ++r) {
      if (!std::isfinite(node.parity(r))) continue;
      if (low < 0 || node.parity(r) < node.parity(low)) low = r;
      if (high < 0 || node.parity(r) > node.parity(high)) high = r;
    }
    out += "  " + NodeTitle(tree, n) + ": " +
           FormatCount(static_cast<int64_t>(tree.nodes()[n].headings.size())) + " of " +
           FormatCount(survey.num_headings()) + " basic headings";
    if (low >= 0) {
      out += "; parity " + FormatFixed(node.parity(low), 2) + " (" +
             std::string(survey.regions.Code(low)) + ") to " + FormatFixed(node.parity(high), 2) +
             " (" + std::string(survey.regions.Code(high)) + ")";
    }
    out += "\n";
  }
  return out;
}

}  // namespace

std::string ComputeJobSummary::FullReport() const {
  std::string out = SurveyCounts(survey);
  out += compute.BriefReport() + "; " + FormatCount(static_cast<int64_t>(warnings.size())) +
         (warnings.size() == 1 ? " warning" : " warnings") +
         (warnings.empty() ? "" : " (listed at the end, on standard error, and in warnings.csv)") +
         "\n";
  if (survey.national_weights) {
    out +=
        "weights: national (the expenditure file has no region column): every region is "
        "compared on the national basket, valued at its own heading parities; regional "
        "nominal and real expenditure are not computed\n";
  }
  if (result.nodes.empty()) return out;
  out += "\nparities for " + NodeTitle(survey.classification, 0) + " (" +
         result.nodes.front().reference_used + " = 100), dearest first:\n";
  out += RootTable(survey, result,
                   root_spreads.size() == static_cast<size_t>(survey.num_regions())
                       ? root_spreads
                       : RegionSpreads(result.bilaterals.front()));
  out +=
      "(P-L spread, %: 100 x |ln(Laspeyres / Paasche)|, the largest of the region against any "
      "other, with that partner; large spreads mean the price and spending patterns differ and "
      "the choice of formula matters.)\n(" +
      ReferenceConvention(result.nodes.front().reference_used) + ".)\n";
  if (matrices_left_out) {
    out += "\nmatrix/ and bilateral/ not written: " + FormatCount(survey.num_regions()) +
           " regions are more than matrices_up_to_regions (" +
           FormatCount(matrices_up_to_regions) +
           ") and these tables grow as the square of the regions; ask for them with --matrices "
           "NODE (or matrices: in the configuration), or raise matrices_up_to_regions\n";
  }
  out += GroupLines(survey, result);
  if (!outliers.outliers.empty()) {
    int64_t cells = 0;
    for (const Outlier& o : outliers.outliers) cells += o.kind == OutlierKind::kCell ? 1 : 0;
    const Outlier& worst = outliers.outliers.front();
    out += "\noutliers: " + FormatCount(cells) + " cells and " +
           FormatCount(static_cast<int64_t>(outliers.outliers.size()) - cells) +
           " quotes far from the fit (listed in outliers.csv); the worst: " + survey.heading_codes[worst.heading] +
           ", " + std::string(survey.regions.Code(worst.region)) + ", " + std::string(survey.items.Code(worst.item)) +
           " at " + FormatReadable(worst.observed / worst.predicted, 3) + " times the predicted price\n";
  }
  if (outliers.num_cells_not_screenable > 0) {
    out += "not screened: " + FormatCount(outliers.num_cells_not_screenable) +
           " cells no prediction can be formed for (listed in outliers.csv); nothing checked "
           "them\n";
  }
  out += "\nParities are survey estimates: they carry sampling error, depend on how comparable the "
         "items priced are across regions and on the index formula. Official figures come from the "
         "statistical authority.\n";
  return out;
}

}  // namespace paritas
