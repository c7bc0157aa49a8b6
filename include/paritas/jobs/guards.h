// The paths a job reads, for the check that no output is an input
// (PathGuard, run_folder.h).
#ifndef PARITAS_JOBS_GUARDS_H_
#define PARITAS_JOBS_GUARDS_H_

#include "paritas/output/run_folder.h"
#include "paritas/survey/config.h"

namespace paritas {

// A guard holding every file the configuration names as an input: the
// configuration itself, the survey files and the classification file.
PathGuard GuardInputsOf(const RunConfig& config);

}  // namespace paritas

#endif  // PARITAS_JOBS_GUARDS_H_
