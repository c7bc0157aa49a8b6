// Times every registered aggregation method on the root of a survey (written
// by paritas_synth): the bilateral matrices the method asks for and the
// method itself, each the fastest of several runs on one thread, so the
// figures compare methods rather than the machine's load.
// Usage: aggregation_bench CONFIG [REPETITIONS].
#include <omp.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <string>

#include "paritas/aggregation/aggregation.h"
#include "paritas/compute/compute.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey_loader.h"

namespace {

double Seconds(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 2) {
    std::fprintf(stderr, "usage: aggregation_bench CONFIG [REPETITIONS]\n");
    return 1;
  }
  const int repetitions = argc > 2 ? std::max(1, std::atoi(argv[2])) : 5;
  paritas::RunConfig config;
  std::string error;
  if (!paritas::LoadRunConfig(argv[1], &config, &error)) {
    std::fprintf(stderr, "aggregation_bench: %s\n", error.c_str());
    return 1;
  }
  paritas::Survey survey;
  paritas::LoadSummary load;
  if (!paritas::LoadSurvey(config, paritas::LoadOptions(), &survey, &load)) {
    std::fprintf(stderr, "aggregation_bench: %s\n", load.message.c_str());
    return 1;
  }
  paritas::ParityResult result;
  paritas::ComputeSummary summary;
  if (!paritas::ComputeParities(survey, paritas::ComputeOptions::FromConfig(config), &result,
                                &summary)) {
    std::fprintf(stderr, "aggregation_bench: %s\n", summary.message.c_str());
    return 1;
  }
  omp_set_num_threads(1);
  const paritas::NodeArrays arrays = paritas::NodeInputArrays(survey, result, 0);
  std::printf("root: %lld regions x %lld headings, fastest of %d runs on one thread\n",
              static_cast<long long>(arrays.price.rows()),
              static_cast<long long>(arrays.price.cols()), repetitions);
  for (const paritas::AggregationMethod* method : paritas::AggregationMethods()) {
    const std::string name(method->Name());
    double bilateral_seconds = 1e300, method_seconds = 1e300;
    for (int k = 0; k < repetitions; ++k) {
      auto start = std::chrono::steady_clock::now();
      const paritas::BilateralMatrices bilaterals =
          paritas::NodeBilaterals(arrays, method->BilateralsNeeded());
      bilateral_seconds = std::min(bilateral_seconds, Seconds(start));
      start = std::chrono::steady_clock::now();
      const paritas::AggregateParities out = method->Aggregate(arrays, bilaterals);
      method_seconds = std::min(method_seconds, Seconds(start));
      if (!out.identified) std::fprintf(stderr, "%s: not identified\n", name.c_str());
    }
    std::printf("%-16s bilaterals %.3f s + method %.3f s = %.3f s\n", name.c_str(),
                bilateral_seconds, method_seconds, bilateral_seconds + method_seconds);
  }
  return 0;
}
