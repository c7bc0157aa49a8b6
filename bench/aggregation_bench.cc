// Seconds per aggregation method for one node of 1,000 regions x 100
// headings (the L survey's root), complete and with 30 % of the heading
// parities missing: each method from the node's arrays, including the
// bilateral matrices it needs. Figures for the README, never assertions.
//
// Usage: aggregation_bench [REGIONS] [HEADINGS]
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <random>
#include <string>
#include <vector>

#include "paritas/aggregation/aggregation.h"

namespace {

paritas::NodeArrays Arrays(int num_regions, int num_headings, double coverage) {
  std::mt19937 random(20261202);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  std::normal_distribution<double> normal(0.0, 0.15);
  paritas::NodeArrays arrays;
  arrays.price.resize(num_regions, num_headings);
  arrays.expenditure.resize(num_regions, num_headings);
  for (int r = 0; r < num_regions; ++r) {
    const double size = std::exp(4.6 * uniform(random));
    for (int h = 0; h < num_headings; ++h) {
      const bool priced = uniform(random) < coverage || h == r % num_headings;
      arrays.price(r, h) = priced ? std::exp(normal(random)) : std::nan("");
      arrays.expenditure(r, h) = size * (0.2 + uniform(random));
    }
  }
  return arrays;
}

double MedianSeconds(const paritas::NodeArrays& arrays, const paritas::AggregationMethod& method,
                     bool* ok) {
  std::vector<double> seconds;
  for (int k = 0; k < 5; ++k) {
    const auto start = std::chrono::steady_clock::now();
    const paritas::AggregateParities result = paritas::AggregateFromBilaterals(
        arrays, paritas::NodeBilaterals(arrays, method.BilateralsNeeded()), method);
    seconds.push_back(
        std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count());
    *ok = result.failure.empty() && result.identified;
  }
  std::sort(seconds.begin(), seconds.end());
  return seconds[seconds.size() / 2];
}

}  // namespace

int main(int argc, char** argv) {
  const int num_regions = argc > 1 ? std::atoi(argv[1]) : 1000;
  const int num_headings = argc > 2 ? std::atoi(argv[2]) : 100;
  for (double coverage : {1.0, 0.7}) {
    const paritas::NodeArrays arrays = Arrays(num_regions, num_headings, coverage);
    for (const paritas::AggregationMethod* method : paritas::AggregationMethods()) {
      bool ok = false;
      const double seconds = MedianSeconds(arrays, *method, &ok);
      std::printf("%d regions x %d headings, %.0f %% of heading parities: %-20s %.3f s%s\n",
                  num_regions, num_headings, 100 * coverage, std::string(method->Name()).c_str(),
                  seconds, ok ? "" : " (FAILED)");
    }
  }
  return 0;
}
