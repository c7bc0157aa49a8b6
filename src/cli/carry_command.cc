// `paritas carry`: the options arrive as text and are checked here, so their
// messages name the option; the library carries and writes.
#include "cli/commands.h"
#include "paritas/base/text.h"
#include "paritas/jobs/carry_job.h"
#include "paritas/jobs/jobs.h"

namespace paritas::cli {

int RunCarryCommand(const CarryArguments& arguments) {
  CarryOptions options;
  options.benchmark_dir = arguments.benchmark_dir;
  options.indices_path = arguments.indices;
  options.period = arguments.period;
  options.output_dir = arguments.output;
  options.expenditure_path = arguments.expenditure;
  options.config_path = arguments.config;
  options.report = !arguments.no_report;
  if (arguments.missing_index &&
      !FromString(*arguments.missing_index, &options.missing_index)) {
    PrintError("--missing-index must be one of: " + JoinNames(MissingIndexRuleNames()) +
               "; found '" + *arguments.missing_index + "'");
    return kExitInvalidInput;
  }
  double value = 0.0;
  if (arguments.threads) {
    if (!ParseWholeOption("--threads", *arguments.threads, 0, 1024, &value, " (all cores)")) {
      return kExitInvalidInput;
    }
    options.num_threads = static_cast<int>(value);
  }
  CarrySummary summary;
  const int code = RunCarry(options, &summary);
  if (code != kExitOk) {
    PrintError(summary.message);
    return code;
  }
  PrintOut(summary.FullReport());
  PrintOut("\nwrote " + options.output_dir + ": " + JoinNames(summary.outputs) + "\n");
  PrintErr(WarningsText(summary.warnings));
  return kExitOk;
}

}  // namespace paritas::cli
