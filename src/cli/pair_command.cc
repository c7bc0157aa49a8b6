// `paritas pair`: loads the survey and computes parities as `compute` does
// (without writing its outputs), then compares the two regions.
#include <iostream>

#include "cli/commands.h"
#include "paritas/compute/compute.h"
#include "paritas/survey/config.h"
#include "paritas/base/csv.h"
#include "paritas/jobs/guards.h"
#include "paritas/jobs/jobs.h"
#include "paritas/output/run_record.h"
#include "paritas/use/pair_comparison.h"
#include "paritas/survey/survey_loader.h"
#include "paritas/base/text.h"

namespace paritas::cli {

int RunPairCommand(const std::string& config_path, const Overrides& overrides,
                   const std::string& from, const std::string& to, const std::string& node,
                   const std::string& csv_path, bool every_method) {
  RunConfig config;
  if (!LoadConfigWithOverrides(config_path, overrides, &config)) return kExitInvalidInput;
  std::string error;
  if (!csv_path.empty()) {
    PathGuard guard = GuardInputsOf(config);
    guard.AddOutputFile(csv_path, "--csv");
    if (!guard.Check(&error)) {
      PrintError(error);
      return kExitInvalidInput;
    }
  }
  LoadOptions load_options;
  load_options.invalid_rows = config.invalid_rows;
  load_options.num_threads = config.threads;
  Survey survey;
  LoadSummary load;
  if (!LoadSurvey(config, load_options, &survey, &load)) {
    if (!load.rejected_rows.empty()) PrintErr(DescribeRejectedRows(load));
    PrintError(load.message);
    return kExitInvalidInput;
  }
  if (load.num_rows_rejected > 0) {
    // Under skip the comparison rests on fewer rows than the files hold: say so.
    PrintErr("paritas: warning: " + FormatCount(load.num_rows_rejected) +
             " invalid rows left out of the comparison:\n" + DescribeRejectedRows(load));
  }
  ParityResult result;
  ComputeSummary compute;
  if (!ComputeParities(survey, ComputeOptions::FromConfig(config), &result, &compute)) {
    PrintError(compute.message);
    return compute.outcome == ComputeOutcome::kComputationFailed ? kExitComputationFailed
                                                                 : kExitInvalidInput;
  }
  PairComparison comparison;
  if (!ComparePair(survey, result, from, to, node, &comparison, &error)) {
    PrintError(error);
    return kExitInvalidInput;
  }
  if (every_method) {
    TransitiveUnderEveryMethod(survey, ComputeOptions::FromConfig(config), &comparison);
  }
  RunRecord record;
  record.command = "pair";
  record.config = &config;
  record.load = &load;
  record.survey = &survey;
  record.compute = &compute;
  const PairIntervalStatus status =
      LookUpPairInterval(config.output, RunRecordJson(record), survey, &comparison);
  if (status == PairIntervalStatus::kOtherRun || status == PairIntervalStatus::kUnreadable) {
    PrintErr("paritas: warning: " + comparison.ratio_note + "\n");
  }
  PrintOut(PairTable(comparison));
  if (!csv_path.empty()) {
    if (!WriteFileAtomically(csv_path, PairCsv(comparison), &error)) {
      PrintError(error);
      return kExitInvalidInput;
    }
    PrintOut("\nwrote " + csv_path + "\n");
  }
  return kExitOk;
}

}  // namespace paritas::cli
