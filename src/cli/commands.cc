// Thin wrappers: read the configuration, apply overrides, run the job, print.
#include "cli/commands.h"

#include <cmath>
#include <cstdio>
#include <iostream>

#include "paritas/base/text.h"
#include "paritas/jobs/jobs.h"
#include "paritas/survey/config.h"

namespace paritas::cli {
namespace {


void PrintLoadFailure(const LoadSummary& load) {
  if (load.num_rows_rejected > 0) PrintErr(DescribeRejectedRows(load));
  PrintError(load.message);
}

}  // namespace

bool LoadConfigWithOverrides(const std::string& path, const Overrides& overrides, RunConfig* config) {
  std::string error;
  if (!LoadRunConfig(path, config, &error)) {
    PrintError(error);
    return false;
  }
  if (overrides.output) config->output = *overrides.output;
  if (overrides.reference &&
      !ParseReference("--reference", *overrides.reference, &config->reference, &error)) {
    PrintError(error);
    return false;
  }
  if (overrides.elementary) {
    const ElementaryMethod* method = FindElementaryMethod(*overrides.elementary);
    if (method == nullptr) {
      PrintError(NotOneOf("--elementary", *overrides.elementary, ElementaryMethodNames()));
      return false;
    }
    config->elementary = method->Name();
  }
  if (overrides.aggregation) {
    const AggregationMethod* method = FindAggregationMethod(*overrides.aggregation);
    if (method == nullptr) {
      PrintError(NotOneOf("--aggregation", *overrides.aggregation, AggregationMethodNames()));
      return false;
    }
    config->aggregation = method->Name();
  }
  if (overrides.invalid_rows && !FromString(*overrides.invalid_rows, &config->invalid_rows)) {
    PrintError(NotOneOf("--invalid-rows", *overrides.invalid_rows, InvalidRowPolicyNames()));
    return false;
  }
  if (overrides.threads) {
    double threads = 0;
    if (!ParseWholeOption("--threads", *overrides.threads, 0, 1024, &threads, " (all cores)")) {
      return false;
    }
    config->threads = static_cast<int>(threads);
  }
  if (!overrides.matrices.empty()) config->matrices = overrides.matrices;
  if (overrides.no_report) config->report = false;
  if (overrides.strict) config->strict = true;
  if (!config->IsValid(&error)) {
    PrintError(error);
    return false;
  }
  return true;
}

bool ParseWholeOption(const std::string& option, const std::string& text, double min, double max,
                      double* value, const std::string& min_note) {
  double parsed = 0.0;
  if (ParseNumber(text, &parsed) != NumberStatus::kOk || parsed != std::floor(parsed) ||
      parsed < min || parsed > max) {
    PrintError(option + " must be a whole number from " + FormatFixed(min, 0) + min_note + " to " +
               FormatFixed(max, 0) + ", found '" + text + "'");
    return false;
  }
  *value = parsed;
  return true;
}

void PrintError(const std::string& message) { PrintErr("paritas: error: " + message + "\n"); }

void PrintOut(const std::string& text) { std::cout << VisibleText(text); }
void PrintErr(const std::string& text) { std::cerr << VisibleText(text); }

int RunCheckCommand(const std::string& config_path, const Overrides& overrides) {
  RunConfig config;
  if (!LoadConfigWithOverrides(config_path, overrides, &config)) return kExitInvalidInput;
  CheckSummary summary;
  const int code = RunCheck(config, &summary);
  if (summary.load.outcome != LoadOutcome::kOk) {
    PrintOut(summary.FullReport());
    PrintLoadFailure(summary.load);
    return code;
  }
  PrintOut(summary.FullReport());
  return code;
}

int RunComputeCommand(const std::string& config_path, const Overrides& overrides) {
  RunConfig config;
  if (!LoadConfigWithOverrides(config_path, overrides, &config)) return kExitInvalidInput;
  ComputeJobSummary summary;
  JobOutputOptions output;
  output.keep_texts = false;  // the files are on disk; nothing here reads their text
  const int code = RunCompute(config, &summary, output);
  if (code != kExitOk && code != kExitStrictWarnings) {
    if (summary.load.outcome != LoadOutcome::kOk) {
      PrintLoadFailure(summary.load);
    } else {
      PrintError(summary.message);
    }
    return code;
  }
  PrintOut(summary.FullReport());
  PrintOut("\nwrote " + std::to_string(summary.outputs.size()) + " files to " + config.output + "\n");
  // Last, on standard error, where a pipeline's log keeps them apart.
  PrintErr("\n" + WarningsText(summary.warnings));
  if (code == kExitStrictWarnings) PrintError(summary.message);
  return code;
}

}  // namespace paritas::cli
