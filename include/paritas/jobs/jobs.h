// The jobs the command line runs, as library entry points: each resets its
// summary, validates, runs the stages, writes its outputs and returns an exit
// code (0 ok, 1 invalid input or configuration, 2 computation failed, 3
// warnings under strict mode, after writing everything).
#ifndef PARITAS_JOBS_JOBS_H_
#define PARITAS_JOBS_JOBS_H_

#include <string>
#include <vector>

#include "paritas/compute/compute.h"
#include "paritas/compute/plausibility.h"
#include "paritas/survey/config.h"
#include "paritas/uncertainty/outliers.h"
#include "paritas/output/run_folder.h"
#include "paritas/output/output_writers.h"
#include "paritas/output/run_record.h"
#include "paritas/survey/survey.h"
#include "paritas/survey/survey_loader.h"

namespace paritas {

inline constexpr int kExitOk = 0;
inline constexpr int kExitInvalidInput = 1;
inline constexpr int kExitComputationFailed = 2;
// Everything was written, but the run raised warnings or found gross
// outliers and strict mode (--strict, `strict: true`) was asked for.
inline constexpr int kExitStrictWarnings = 3;

// Structure of one basic heading, as `check` reports it.
struct HeadingCheck {
  int heading = -1;
  int num_regions_priced = 0;
  int num_items_priced = 0;
  int num_items_listed = 0;
  int64_t num_cells = 0;
  int64_t num_quotes = 0;
  // Cells priced / (regions priced x items priced).
  double fill_share = 0.0;
  std::vector<std::vector<int>> groups;  // linked groups; one when linked
  std::vector<int> regions_without_prices;
  std::vector<int> regions_without_expenditure;  // among regions with prices
  // Cells flagged as outliers against the heading's CPD fit; -1 when the
  // parities could not be computed.
  int num_flagged_cells = -1;
};

struct CheckSummary {
  int exit_code = kExitInvalidInput;
  std::string message = "not run";
  LoadSummary load;
  Survey survey;
  std::vector<HeadingCheck> headings;
  int num_unlinked_headings = 0;
  double outlier_threshold = 3.5;
  bool usable = false;
  // The warnings `compute` will raise with the same configuration (known
  // when the parities could be computed).
  bool compute_warnings_known = false;
  std::vector<RunWarning> compute_warnings;

  // The readable summary printed by `paritas check`. When the load failed,
  // only the files read: the rows that stopped it are printed with its
  // message (DescribeRejectedRows), not twice.
  std::string FullReport() const;
};

// Validates a survey and describes its structure.
int RunCheck(const RunConfig& config, CheckSummary* summary);

struct ComputeJobSummary {
  int exit_code = kExitInvalidInput;
  std::string message = "not run";
  LoadSummary load;
  ComputeSummary compute;
  Survey survey;
  ParityResult result;
  OutlierReport outliers;
  // Identifies the run in run.json (NewRunId()).
  std::string run_id;
  // Files written, relative to the output folder.
  std::vector<std::string> outputs;
  // Wall seconds per stage, back to back: read, cells, elementary,
  // aggregation, outliers (the screen), checks (plausibility, warnings), contributions,
  // write (formatting, digesting and staging every file but run.json, which
  // records these). Their sum is the job's wall time up to run.json.
  std::vector<StageTiming> stages;
  // The root's spread per region (RegionSpreads), computed once for the
  // terminal table and the report; empty when the root has no bilaterals.
  // Without the report (`report` false) and above matrices_up_to_regions,
  // the medians are NaN (SpreadOptions::region_medians); the largest
  // spreads and their partners are the same either way.
  std::vector<RegionSpread> root_spreads;
  // True when matrix/ and bilateral/ were left out: `matrices` was not given
  // and the survey has more regions than matrices_up_to_regions (copied
  // here for the terminal).
  bool matrices_left_out = false;
  int matrices_up_to_regions = 0;
  // Basket shares and per node/region warning kinds (parities.csv).
  PlausibilityResult plausibility;
  // Outliers at least checks.gross_outlier_ratio from their prediction.
  int64_t num_gross_outliers = 0;
  // Every warning of the run, in listing order (also in warnings.csv).
  std::vector<RunWarning> warnings;
  // Every output file with its text, run.json last, whether written or not
  // (JobOutputOptions::write_files; the texts of written files are empty
  // when JobOutputOptions::keep_texts is false); empty when the run failed.
  std::vector<OutputFile> files;

  // What `paritas compute` prints on standard output: counts, the root
  // table, the outliers, the cautions. The warnings go to standard error
  // (WarningsText).
  std::string FullReport() const;
};

// Loads, computes and writes every output of `paritas compute` (with
// output.write_files false: builds them in summary->files only).
int RunCompute(const RunConfig& config, ComputeJobSummary* summary,
               const JobOutputOptions& output = {});

// Resolves the `matrices` setting to node indices ({} = root only; "all" =
// every node). Returns false with a message for an unknown node code.
bool ResolveMatrixNodes(const Classification& tree, const std::vector<std::string>& codes,
                        std::vector<int>* nodes, std::string* error);

// Lists up to `limit` rejected rows, one message per line.
std::string DescribeRejectedRows(const LoadSummary& load, size_t limit = 20);

}  // namespace paritas

#endif  // PARITAS_JOBS_JOBS_H_
