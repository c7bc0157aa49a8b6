// `paritas compare`: the numbers arrive as text and are checked here, so
// their messages name the option; the library compares and writes.
#include "cli/commands.h"
#include "paritas/base/text.h"
#include "paritas/jobs/compare_job.h"
#include "paritas/jobs/jobs.h"

namespace paritas::cli {

int RunCompareCommand(const CompareArguments& arguments) {
  CompareOptions options;
  options.old_dir = arguments.old_dir;
  options.new_dir = arguments.new_dir;
  options.output_dir = arguments.output;
  options.node = arguments.node;
  double value = 0.0;
  if (arguments.top) {
    if (!ParseWholeOption("--top", *arguments.top, 1, 1000, &value)) return kExitInvalidInput;
    options.num_movers = static_cast<int>(value);
  }
  if (arguments.z) {
    if (ParseNumber(*arguments.z, &value) != NumberStatus::kOk || !(value > 0)) {
      PrintError("--z must be a number above 0, found '" + *arguments.z + "'");
      return kExitInvalidInput;
    }
    options.z = value;
  }
  RunComparison comparison;
  CompareSummary summary;
  std::string text;
  const int code = RunCompare(options, &comparison, &summary, &text);
  if (code != kExitOk) {
    PrintError(summary.message);
    return code;
  }
  PrintOut(text);
  if (options.output_dir.empty()) {
    PrintOut(
        "\nno files written (--output FOLDER writes changes.csv, drivers.csv and "
        "comparison.html)\n");
  } else {
    PrintOut("\nwrote " + options.output_dir + ": " + JoinNames(summary.files_written) + "\n");
  }
  return kExitOk;
}

}  // namespace paritas::cli
