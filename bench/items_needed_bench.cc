// Validates the items-needed table by simulation (items_needed_sim.h) and
// prints, per node, the items now, the standard error now, the standard
// error the plan predicts with the items it asks for and the one the
// simulated surveys reached. Figures for the README; the ctest
// ItemsNeeded.SimulatedSurveysReachThePlannedStandardError runs a small
// version with bounds. Usage: items_needed_bench [regions=60] [headings=12]
// [items_now=8] [target_share=0.5] [samples=200] [seed=1].
#include <cstdio>
#include <cstdlib>
#include <string>

#include "items_needed_sim.h"

int main(int argc, char** argv) {
  paritas::synthetic::ItemsNeededSimOptions options;
  options.num_regions = argc > 1 ? std::atoi(argv[1]) : 60;
  options.num_headings = argc > 2 ? std::atoi(argv[2]) : 12;
  options.num_groups = 3;
  options.items_now = argc > 3 ? std::atoi(argv[3]) : 8;
  options.target_share = argc > 4 ? std::atof(argv[4]) : 0.5;
  options.samples = argc > 5 ? std::atoi(argv[5]) : 200;
  options.seed = argc > 6 ? std::strtoull(argv[6], nullptr, 10) : 1;
  options.replicates = 1000;
  paritas::synthetic::ItemsNeededSimResult result;
  std::string error;
  if (!paritas::synthetic::SimulateItemsNeeded(options, &result, &error)) {
    std::fprintf(stderr, "%s\n", error.c_str());
    return 1;
  }
  std::printf("%d regions x %d headings x %d items now; target se %.5f; planned and priced %d "
              "items per heading (pool %d), %d simulated surveys\n",
              options.num_regions, options.num_headings, options.items_now, result.target_log_se,
              result.items_priced, options.pool_items, options.samples);
  std::printf("%-8s %9s %9s %12s %10s %16s\n", "node", "items_now", "se_now", "se_predicted",
              "se_reached", "reached/predicted");
  double sum_ratio = 0.0;
  int num_headings = 0;
  for (const auto& row : result.rows) {
    const double ratio = row.log_se_reached / row.log_se_predicted;
    if (row.is_heading) {
      sum_ratio += ratio;
      ++num_headings;
    }
    std::printf("%-8s %9.1f %9.5f %12.5f %10.5f %16.3f\n", row.node.c_str(), row.items_now,
                row.log_se_now, row.log_se_predicted, row.log_se_reached, ratio);
  }
  if (num_headings > 0) {
    std::printf("mean reached/predicted over headings: %.3f\n", sum_ratio / num_headings);
  }
  return 0;
}
