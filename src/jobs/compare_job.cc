// The compare job: guards the paths, compares, writes the folder with a run
// record naming both runs it read.
#include "paritas/jobs/compare_job.h"

#include <filesystem>
#include <nlohmann/json.hpp>

#include "paritas/base/text.h"
#include "paritas/jobs/jobs.h"
#include "paritas/output/comparison_report.h"
#include "paritas/output/run_folder.h"
#include "paritas/output/run_record.h"

namespace paritas {
namespace {

// The record's `compare` section: the runs read and what differs.
std::string CompareSection(const RunComparison& c) {
  nlohmann::ordered_json out;
  out["old"] = {{"folder", ValidUtf8(c.old_dir)},
                {"run_id", ValidUtf8(c.old_run_id)},
                {"reference", ValidUtf8(c.old_reference)}};
  out["new"] = {{"folder", ValidUtf8(c.new_dir)},
                {"run_id", ValidUtf8(c.new_run_id)},
                {"reference", ValidUtf8(c.new_reference)}};
  out["rebased_to"] = ValidUtf8(c.rebased_to);
  out["z"] = c.z;
  std::vector<std::string> statements;
  for (const std::string& s : c.statements) statements.push_back(ValidUtf8(s));
  out["statements"] = statements;
  return out.dump(-1, ' ', false, nlohmann::ordered_json::error_handler_t::replace);
}

}  // namespace

int RunCompare(const CompareOptions& options, RunComparison* comparison, CompareSummary* summary,
               std::string* text) {
  namespace fs = std::filesystem;
  text->clear();
  std::string error;
  if (!options.output_dir.empty()) {
    PathGuard guard;
    for (const std::string& dir : {options.old_dir, options.new_dir}) {
      for (const char* file : {"parities.csv", "run.json", "contributions.csv"}) {
        guard.AddInput((fs::path(dir) / file).string(), "input " + std::string(file));
      }
      guard.AddInput((fs::path(dir) / "sensitivity" / "bootstrap.csv").string(),
                     "input sensitivity/bootstrap.csv");
    }
    guard.AddOutputFolder(options.output_dir, "--output");
    if (!guard.Check(&error)) {
      *summary = CompareSummary();
      summary->outcome = CompareOutcome::kInvalidInput;
      summary->message = error;
      return kExitInvalidInput;
    }
  }
  if (!CompareRuns(options, comparison, summary)) return kExitInvalidInput;
  *text = CompareTable(*comparison, options.num_movers);
  if (options.output_dir.empty()) return kExitOk;
  std::vector<OutputFile> files = {{"changes.csv", ChangesCsv(*comparison)},
                                   {"drivers.csv", DriversCsv(*comparison)},
                                   {"comparison.html", ComparisonHtml(*comparison)}};
  RunRecord record;
  record.command = "compare";
  record.run_id = NewRunId();
  record.output_digests = DigestOutputs(files);
  record.outcome = "ok";
  record.message = std::to_string(summary->num_changes) + " node x region rows compared";
  for (const OutputFile& f : files) summary->files_written.push_back(f.relative_path);
  record.sections.push_back({"compare", CompareSection(*comparison)});
  files.push_back({"run.json", RunRecordJson(record)});
  summary->files_written.push_back("run.json");
  RunFolderSummary written;
  if (!WriteRunFolder(options.output_dir, files, &written, &error)) {
    summary->outcome = CompareOutcome::kInvalidInput;
    summary->message = error;
    summary->files_written.clear();
    return kExitInvalidInput;
  }
  return kExitOk;
}

}  // namespace paritas
