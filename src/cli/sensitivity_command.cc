// `paritas sensitivity`: option values arrive as text and are parsed here, so
// every bad value gets a message naming the option, the value and the rule;
// the library job does the rest. The progress bar is drawn only on a
// terminal, and only once a run has lasted a second.
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <iostream>
#include <string>

#include "cli/commands.h"
#include "paritas/survey/config.h"
#include "paritas/jobs/jobs.h"
#include "paritas/uncertainty/sensitivity.h"
#include "paritas/base/text.h"

namespace paritas::cli {
namespace {

// Splits "90,75,50" on commas, trimming spaces.
std::vector<std::string> SplitList(const std::string& text) {
  std::vector<std::string> parts;
  size_t start = 0;
  while (true) {
    const size_t comma = text.find(',', start);
    parts.emplace_back(Trim(text.substr(start, comma == std::string::npos ? std::string::npos : comma - start)));
    if (comma == std::string::npos) break;
    start = comma + 1;
  }
  return parts;
}

bool ParseArguments(const SensitivityArguments& arguments, SensitivityOptions* options) {
  double value = 0.0;
  if (arguments.replicates) {
    if (!ParseWholeOption("--replicates", *arguments.replicates, 2, 100000, &value)) return false;
    options->replicates = static_cast<int>(value);
  }
  if (arguments.seed) {
    // Seeds up to 2^53 read exactly through a double.
    if (!ParseWholeOption("--seed", *arguments.seed, 0, 9007199254740992.0, &value)) return false;
    options->seed = static_cast<uint64_t>(value);
  }
  if (arguments.level) {
    // 95 and 0.95 both mean a 95 % interval.
    const bool read = ParseNumber(*arguments.level, &value) == NumberStatus::kOk;
    const bool share = value >= kMinIntervalLevel && value <= kMaxIntervalLevel;
    const bool percentage = value > 1.0 && value <= 100.0 * kMaxIntervalLevel;
    if (!read || !(share || percentage)) {
      // 1 is neither: a share of 1 is no interval, and a 1 % one is written 0.01.
      PrintError("--level must be a percentage above 1 and at most " +
                 FormatShareAsPercent(kMaxIntervalLevel) + " (e.g. 95) or a share from " +
                 FormatFixed(kMinIntervalLevel, 2) + " to " + FormatFixed(kMaxIntervalLevel, 3) +
                 " (e.g. 0.95), found '" + *arguments.level + "'");
      return false;
    }
    options->level = value > 1.0 ? PercentToShare(value) : value;
  }
  if (arguments.coverage) {
    options->coverage_levels.clear();
    for (const std::string& part : SplitList(*arguments.coverage)) {
      if (ParseNumber(part, &value) != NumberStatus::kOk || !(value > 0.0 && value <= 100.0)) {
        PrintError("--coverage must list percentages of items kept, each above 0 and at most 100 (e.g. "
                   "90,75,50,25), found '" + part + "'");
        return false;
      }
      options->coverage_levels.push_back(value / 100.0);
    }
  }
  if (arguments.repetitions) {
    if (!ParseWholeOption("--repetitions", *arguments.repetitions, 2, 10000, &value)) return false;
    options->coverage_repetitions = static_cast<int>(value);
  }
  if (arguments.node) options->node = std::string(Trim(*arguments.node));
  if (arguments.parts) {
    std::string error;
    if (!SetSensitivityParts(SplitList(*arguments.parts), options, &error)) {
      PrintError("--parts: " + error);
      return false;
    }
  }
  if (arguments.bootstrap && !FromString(*arguments.bootstrap, &options->bootstrap)) {
    PrintError("--bootstrap must be one of: rescaled, plain; found '" + *arguments.bootstrap + "'");
    return false;
  }
  if (arguments.interval && !FromString(*arguments.interval, &options->interval)) {
    PrintError("--interval must be one of: expanded, percentile; found '" + *arguments.interval +
               "'");
    return false;
  }
  if (arguments.target_se) {
    if (ParseNumber(*arguments.target_se, &value) != NumberStatus::kOk ||
        !(value >= kMinTargetLogSe && value < 1.0)) {
      PrintError("--target-se must be a standard error of ln parity of at least " +
                 FormatFixed(kMinTargetLogSe, 6) + " and below 1 (e.g. 0.01), found '" +
                 *arguments.target_se + "'");
      return false;
    }
    options->target_log_se = value;
  }
  options->write_replicates = arguments.write_replicates;
  options->all_pairs = arguments.all_pairs;
  if (options->all_pairs && !options->run_bootstrap) {
    PrintError("--all-pairs needs the bootstrap part (--parts without bootstrap)");
    return false;
  }
  if (options->write_replicates && !options->run_bootstrap) {
    PrintError("--write-replicates needs the bootstrap part (--parts without bootstrap)");
    return false;
  }
  std::string error;
  if (!options->IsValid(&error)) {
    PrintError(error);
    return false;
  }
  return true;
}

// Draws "part [#####     ]  40 %" on stderr, at most ten times a second.
class ProgressBar {
 public:
  ProgressBar() : enabled_(::isatty(2) == 1), start_(std::chrono::steady_clock::now()) {}
  ~ProgressBar() { Clear(); }

  void Update(const std::string& part, int64_t done, int64_t total) {
    if (!enabled_ || total <= 0) return;
    const auto now = std::chrono::steady_clock::now();
    if (now - start_ < std::chrono::seconds(1)) return;
    if (done < total && now - last_ < std::chrono::milliseconds(100)) return;
    last_ = now;
    constexpr int kWidth = 30;
    const int filled = static_cast<int>(kWidth * done / total);
    std::string line = "\r" + part + std::string(part.size() < 14 ? 14 - part.size() : 0, ' ') + "[" +
                       std::string(filled, '#') + std::string(kWidth - filled, ' ') + "] " +
                       std::to_string(100 * done / total) + " %   ";
    std::cerr << line << std::flush;
    drawn_ = true;
  }

  void Clear() {
    if (drawn_) std::cerr << "\r" << std::string(60, ' ') << "\r" << std::flush;
    drawn_ = false;
  }

 private:
  bool enabled_;
  bool drawn_ = false;
  std::chrono::steady_clock::time_point start_;
  std::chrono::steady_clock::time_point last_{};
};

}  // namespace

int RunSensitivityCommand(const std::string& config_path, const Overrides& overrides,
                          const SensitivityArguments& arguments) {
  RunConfig config;
  if (!LoadConfigWithOverrides(config_path, overrides, &config)) return kExitInvalidInput;
  SensitivityOptions options;
  options.num_threads = config.threads;
  if (!ParseArguments(arguments, &options)) return kExitInvalidInput;
  ProgressBar bar;
  options.progress = [&bar](const std::string& part, int64_t done, int64_t total) { bar.Update(part, done, total); };

  SensitivityJobSummary summary;
  const int code = RunSensitivityJob(config, options, &summary);
  bar.Clear();
  if (code != kExitOk && code != kExitStrictWarnings) {
    if (summary.load.outcome != LoadOutcome::kOk && !summary.load.rejected_rows.empty()) {
      PrintErr(DescribeRejectedRows(summary.load));
    }
    PrintError(summary.message);
    return code;
  }
  PrintOut(summary.FullReport(options));
  PrintOut("\nwrote " + std::to_string(summary.outputs.size()) + " files to " + config.output +
           " (sensitivity/ and report.html)\n");
  PrintErr("\n" + WarningsText(summary.warnings));
  if (code == kExitStrictWarnings) PrintError(summary.message);
  return code;
}

}  // namespace paritas::cli
