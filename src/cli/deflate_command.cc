// `paritas deflate`: the options come parsed into DeflateOptions; this file
// applies the row policy, runs the library and reports.
#include <iostream>

#include "cli/commands.h"
#include "paritas/jobs/carry_job.h"
#include "paritas/use/deflation.h"
#include "paritas/jobs/jobs.h"
#include "paritas/base/text.h"

namespace paritas::cli {

int RunDeflateCommand(const DeflateOptions& given, const Overrides& overrides) {
  DeflateOptions options = given;
  if (overrides.invalid_rows && !FromString(*overrides.invalid_rows, &options.invalid_rows)) {
    PrintError(NotOneOf("--invalid-rows", *overrides.invalid_rows, InvalidRowPolicyNames()));
    return kExitInvalidInput;
  }
  DeflateSummary summary;
  if (!Deflate(options, &summary)) {
    for (const RejectedRow& row : summary.rejected_rows) PrintErr(row.reason + "\n");
    PrintError(summary.message);
    return kExitInvalidInput;
  }
  PrintOut(summary.BriefReport() + "\n");
  if (const std::string note = CarriedRunNote(options.parities_dir); !note.empty()) {
    PrintOut("note: " + note + "\n");
  }
  if (!summary.rejected_rows.empty()) {
    PrintOut("rejected rows (listed in " + summary.rejected_path + "):\n");
    for (const RejectedRow& row : summary.rejected_rows) PrintOut("  " + row.reason + "\n");
    if (summary.num_rows_rejected > static_cast<int64_t>(summary.rejected_rows.size())) {
      PrintOut("  ... " +
               std::to_string(summary.num_rows_rejected - static_cast<int64_t>(summary.rejected_rows.size())) +
               " more\n");
    }
  }
  PrintOut("wrote " + options.output_path + " (added columns: " + JoinNames(summary.columns_added) + ")\n");
  return kExitOk;
}

}  // namespace paritas::cli
