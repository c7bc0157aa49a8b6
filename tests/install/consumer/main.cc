// Uses the installed library through its public headers only: a Fisher index
// (a header-light function) and a full `check` of a survey, which pulls in
// the static library's private dependencies (yaml-cpp, OpenSSL, OpenMP,
// Ceres) at link time. Usage: paritas_consumer CONFIG.yaml
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

#include "paritas/aggregation/index_formulas.h"
#include "paritas/jobs/jobs.h"
#include "paritas/survey/config.h"

int main(int argc, char** argv) {
  if (argc != 2) {
    std::fprintf(stderr, "usage: paritas_consumer CONFIG.yaml\n");
    return 2;
  }
  // Laspeyres (2+2)/(1+2) = 4/3, Paasche (2+4)/(1+4) = 6/5, Fisher sqrt(8/5).
  const std::vector<double> price_a = {1, 2}, price_b = {2, 2};
  const std::vector<double> quantity_a = {1, 1}, quantity_b = {1, 2};
  const double fisher = paritas::Fisher(price_a, price_b, quantity_a, quantity_b);
  std::printf("fisher %.6f\n", fisher);
  if (std::fabs(fisher - std::sqrt(1.6)) > 1e-12) return 1;

  paritas::RunConfig config;
  std::string error;
  if (!paritas::LoadRunConfig(argv[1], &config, &error)) {
    std::fprintf(stderr, "%s\n", error.c_str());
    return 1;
  }
  paritas::CheckSummary summary;
  const int exit_code = paritas::RunCheck(config, &summary);
  std::printf("check exit %d, %d regions\n", exit_code, summary.survey.num_regions());
  return exit_code;
}
