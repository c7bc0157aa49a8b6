// Times the item bootstrap on the M survey (200 regions x 100 headings x 50
// items): the survey is generated with the seeded generator, written to a
// temporary folder and loaded as the command line would; only the bootstrap
// itself is timed. Usage: sensitivity_bench [replicates=1000] [threads=0]
// [elementary=cpd].
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <unistd.h>
#include <string>

#include "paritas/survey/config.h"
#include "paritas/uncertainty/sensitivity.h"
#include "paritas/survey/survey_loader.h"
#include "synthetic_survey.h"

int main(int argc, char** argv) {
  const int replicates = argc > 1 ? std::atoi(argv[1]) : 1000;
  const int threads = argc > 2 ? std::atoi(argv[2]) : 0;
  const std::string elementary = argc > 3 ? argv[3] : "cpd";

  paritas::synthetic::SyntheticOptions synth;
  synth.num_regions = 200;
  synth.num_headings = 100;
  synth.items_per_heading = 50;
  const std::string folder =
      (std::filesystem::temp_directory_path() / ("paritas-sensitivity-bench-" + std::to_string(::getpid()))).string();
  std::string error;
  if (!paritas::synthetic::WriteSurvey(paritas::synthetic::Generate(synth), folder, &error)) {
    std::fprintf(stderr, "%s\n", error.c_str());
    return 1;
  }
  paritas::RunConfig config;
  paritas::Survey survey;
  paritas::LoadSummary load;
  if (!paritas::LoadRunConfig(folder + "/config.yaml", &config, &error) ||
      !paritas::LoadSurvey(config, paritas::LoadOptions(), &survey, &load)) {
    std::fprintf(stderr, "%s%s\n", error.c_str(), load.message.c_str());
    return 1;
  }
  std::filesystem::remove_all(folder);

  paritas::ComputeOptions compute = paritas::ComputeOptions::FromConfig(config);
  compute.elementary.method = elementary;
  if (paritas::FindElementaryMethod(elementary) == nullptr) {
    std::fprintf(stderr, "unknown elementary method '%s'\n", elementary.c_str());
    return 1;
  }
  paritas::SensitivityOptions options;
  options.replicates = replicates;
  options.num_threads = threads;
  options.run_leave_one_out = options.run_coverage = options.run_methods = false;
  paritas::SensitivityResult result;
  paritas::SensitivitySummary summary;
  const auto start = std::chrono::steady_clock::now();
  if (!paritas::RunSensitivity(survey, compute, options, &result, &summary)) {
    std::fprintf(stderr, "%s\n", summary.message.c_str());
    return 1;
  }
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  std::printf("survey: %d regions, %d headings, %d items, %zu cells\n", survey.num_regions(),
              survey.num_headings(), survey.num_items(), survey.cells.size());
  std::printf("%d bootstrap replicates (%s): %.2f s in all (full sample %.2f s, bootstrap %.2f s)\n",
              replicates, elementary.c_str(), seconds, summary.full_sample_seconds, summary.bootstrap_seconds);
  return 0;
}
