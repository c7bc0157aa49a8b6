// `paritas compare` as a library entry point: reads two output folders of
// compute, compares them (use/run_comparison.h) and writes the comparison
// folder whole or not at all.
#ifndef PARITAS_JOBS_COMPARE_JOB_H_
#define PARITAS_JOBS_COMPARE_JOB_H_

#include <string>

#include "paritas/use/run_comparison.h"

namespace paritas {

// Compares options.old_dir with options.new_dir. With options.output_dir
// writes changes.csv, drivers.csv, comparison.html and run.json there (no
// input may lie inside it, and it may be neither input folder). Returns the
// exit code: 0 ok, 1 invalid input (message in summary->message). The
// terminal summary (CompareTable) is in *text on success.
int RunCompare(const CompareOptions& options, RunComparison* comparison, CompareSummary* summary,
               std::string* text);

}  // namespace paritas

#endif  // PARITAS_JOBS_COMPARE_JOB_H_
