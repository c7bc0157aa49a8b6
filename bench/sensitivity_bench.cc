// Times the item bootstrap on a generated survey (default 200 regions x 100
// headings x 20 items, the speed goal of the README; the L survey is
// 1000 100 50): the survey is generated with the seeded generator, written to
// a temporary folder and loaded as the command line would; only the
// sensitivity run itself is timed. Usage: sensitivity_bench [replicates=1000]
// [threads=0] [elementary=cpd] [regions=200] [headings=100] [items=20].
#include <chrono>
#include <cstdint>
#include <ctime>
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
  synth.num_regions = argc > 4 ? std::atoi(argv[4]) : 200;
  synth.num_headings = argc > 5 ? std::atoi(argv[5]) : 100;
  synth.items_per_heading = argc > 6 ? std::atoi(argv[6]) : 20;
  synth.seed = 20261201;
  synth.num_groups = 8;  // as bench/run_benchmarks generates S, M and L
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
  const std::clock_t cpu_start = std::clock();
  if (!paritas::RunSensitivity(survey, compute, options, &result, &summary)) {
    std::fprintf(stderr, "%s\n", summary.message.c_str());
    return 1;
  }
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  // CPU seconds of the whole process during the run (all threads): on a
  // shared machine the wall time says more about the neighbours.
  const double cpu_seconds = static_cast<double>(std::clock() - cpu_start) / CLOCKS_PER_SEC;
  std::printf("survey: %d regions, %d headings, %d items, %zu cells\n", survey.num_regions(),
              survey.num_headings(), survey.num_items(), survey.cells.size());
  std::printf("%d bootstrap replicates (%s): %.2f s in all (full sample %.2f s, bootstrap %.2f s)\n",
              replicates, elementary.c_str(), seconds, summary.full_sample_seconds, summary.bootstrap_seconds);
  std::printf("CPU: %.2f s in all, %.1f ms per replicate (full sample included)\n", cpu_seconds,
              1000.0 * cpu_seconds / replicates);
  // FNV-1a of bootstrap.csv, so a speed change can be checked for unchanged numbers.
  uint64_t hash = 14695981039346656037ull;
  for (unsigned char c : paritas::BootstrapCsv(survey, result)) hash = (hash ^ c) * 1099511628211ull;
  std::printf("bootstrap.csv fnv1a: %016llx\n", static_cast<unsigned long long>(hash));
  return 0;
}
