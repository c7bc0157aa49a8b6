// `paritas publish`: the options come as typed; this file parses the
// numbers and the order, runs the library and reports the files written.
#include "cli/commands.h"
#include "paritas/base/text.h"
#include "paritas/jobs/jobs.h"
#include "paritas/use/publication.h"

namespace paritas::cli {

int RunPublishCommand(const PublishArguments& arguments) {
  PublishOptions options;
  options.run_dir = arguments.run_dir;
  options.csv_path = arguments.csv_path;
  options.xlsx_path = arguments.xlsx_path;
  options.config_path = arguments.config_path;
  options.intervals = !arguments.no_intervals;
  double number = 0.0;
  if (arguments.decimals) {
    if (!ParseWholeOption("--decimals", *arguments.decimals, 0, 6, &number))
      return kExitInvalidInput;
    options.decimals = static_cast<int>(number);
  }
  if (arguments.depth) {
    if (!ParseWholeOption("--depth", *arguments.depth, 0, 1000, &number)) return kExitInvalidInput;
    options.max_depth = static_cast<int>(number);
  }
  if (arguments.sort && !FromString(*arguments.sort, &options.order)) {
    PrintError(NotOneOf("--sort", *arguments.sort, PublicationOrderNames()));
    return kExitInvalidInput;
  }
  PublishSummary summary;
  if (!Publish(options, &summary)) {
    PrintError(summary.message);
    return kExitInvalidInput;
  }
  PrintOut(summary.BriefReport() + "\n");
  for (const std::string& path : summary.files_written) PrintOut("wrote " + path + "\n");
  return kExitOk;
}

}  // namespace paritas::cli
