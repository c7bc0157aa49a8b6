// `paritas carry` as a library entry point: a benchmark run folder of
// compute and a file of regional price indices give the parities of a later
// period for every node (use/carry_forward.h), written as a run folder like
// compute's, so publish and compare read it.
//
// The carried heading parities enter the survey as external heading
// parities (every region x heading that has a benchmark parity), and the
// normal aggregation stage (ComputeParities) builds every aggregate and
// group with the run's own methods and reference: nothing of the
// aggregation is written twice.
#ifndef PARITAS_JOBS_CARRY_JOB_H_
#define PARITAS_JOBS_CARRY_JOB_H_

#include <string>
#include <vector>

#include "paritas/compute/compute.h"
#include "paritas/compute/plausibility.h"
#include "paritas/survey/survey.h"
#include "paritas/survey/survey_loader.h"
#include "paritas/use/carry_forward.h"

namespace paritas {

struct CarryOptions {
  // Output folder of `paritas compute` for the benchmark period (holds
  // run.json and parities.csv). Required.
  std::string benchmark_dir;
  // The price index file (ReadPriceIndices). Required.
  std::string indices_path;
  // Period of the index file to carry to; empty (default) = the file's only
  // period.
  std::string period;
  // Folder written whole (a run folder, as compute writes it). Required; it
  // may hold no input.
  std::string output_dir;
  // Expenditure of the later period (the survey's expenditure format:
  // region,heading,expenditure, read like survey.expenditure with its
  // delimiter and decimal mark). Empty (default) = aggregate with the
  // benchmark's expenditure.
  std::string expenditure_path;
  // Configuration of the benchmark run; empty (default) = the one run.json
  // names.
  std::string config_path;
  // Region x heading pairs with a benchmark parity but no index.
  MissingIndexRule missing_index = MissingIndexRule::kStop;
  // Writes report.html (default true).
  bool report = true;
  // Worker threads for reading the benchmark's survey; 0 = all cores.
  int num_threads = 0;

  bool IsValid(std::string* error) const;
};

struct CarrySummary {
  int exit_code = 1;
  std::string message = "not run";
  std::string run_id;
  std::string benchmark_run_id;
  // The period carried to and the weights used ("benchmark" or "later").
  std::string period;
  std::string weights;
  // The benchmark's survey with the carried heading parities as external
  // parities (no cells), and the expenditure aggregated with.
  Survey survey;
  LoadSummary load;
  ComputeSummary compute;
  ParityResult result;
  PriceIndexTable indices;
  CarriedHeadings carried;
  PlausibilityResult plausibility;
  // Every warning of the run, the `extrapolated` ones included.
  std::vector<RunWarning> warnings;
  // Files written, relative to the output folder.
  std::vector<std::string> outputs;

  // What `paritas carry` prints: the extrapolation stated first, the
  // root's carried parities, the cautions.
  std::string FullReport() const;
};

// The caution every carried run carries (terminal, report, run.json).
std::string ExtrapolationCaution(const std::string& benchmark_run_id, const std::string& period);

// For the commands that read a finished run folder (deflate): when `run_dir`
// holds a carried run, "the parities of <dir> are extrapolated to period
// '<P>' (paritas carry): <caution>"; "" for a compute run or no record.
std::string CarriedRunNote(const std::string& run_dir);

// Carries the benchmark to the period and writes the folder: parities.csv
// (with the column extrapolated_to), contributions.csv, warnings.csv,
// carried_headings.csv, matrix/ and bilateral/ of the root, report.html and
// run.json (command "carry", section "carry"). Returns the exit code: 0 ok,
// 1 invalid input (message in summary->message), 2 computation failed.
int RunCarry(const CarryOptions& options, CarrySummary* summary);

}  // namespace paritas

#endif  // PARITAS_JOBS_CARRY_JOB_H_
