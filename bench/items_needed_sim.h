// Checks the items-needed table (paritas/uncertainty/items_needed.h) by
// simulation: a generated survey with few items per heading is run through
// the bootstrap, which says how many items per heading would bring the
// root's standard error to a target; then that many items are priced, many
// times over, from a large pool of items generated with the same regional
// price levels, and the spread of the parities over those surveys is the
// standard error actually reached.
#ifndef PARITAS_BENCH_ITEMS_NEEDED_SIM_H_
#define PARITAS_BENCH_ITEMS_NEEDED_SIM_H_

#include <cstdint>
#include <string>
#include <vector>

namespace paritas::synthetic {

struct ItemsNeededSimOptions {
  int num_regions = 30;      // >= 3
  int num_headings = 8;      // >= 2
  int num_groups = 2;        // top-level aggregates, 1 to num_headings
  int items_now = 8;         // items per heading of the survey analysed, >= 3
  int pool_items = 400;      // items per heading in the pool sampled from
  double noise_sd = 0.05;    // sd of ln quote around the model, log points
  // The target standard error as a share of the root's median standard
  // error now (0.5: halve it, about four times the items).
  double target_share = 0.5;
  int replicates = 400;      // bootstrap replicates on the survey analysed
  int samples = 100;         // surveys priced with the planned items
  uint64_t seed = 1;
  int num_threads = 0;       // 0 = all cores

  bool IsValid(std::string* error) const;
};

// One node: what the table planned and what the simulated surveys reached.
struct ItemsNeededSimRow {
  std::string node;
  bool is_heading = false;
  double items_now = 0.0;
  double log_se_now = 0.0;  // median over regions, bootstrap of the survey analysed
  // Median over regions of log_se_now x sqrt(items_now / items_priced): the
  // standard error the 1/n law predicts with items_priced items.
  double log_se_predicted = 0.0;
  // Median over regions of the standard deviation of ln parity over the
  // simulated surveys, divided by sqrt(1 - items_priced / pool_items)
  // (sampling without replacement from the pool; Cochran 1977, Theorem 2.2).
  double log_se_reached = 0.0;
};

struct ItemsNeededSimResult {
  double target_log_se = 0.0;
  int items_priced = 0;  // the root's items_for_median, priced in every heading
  std::vector<ItemsNeededSimRow> rows;  // root, top aggregates, headings
};

// Runs the simulation; false with `error` on invalid options or a failed
// run (survey files are written to and removed from a temporary folder).
bool SimulateItemsNeeded(const ItemsNeededSimOptions& options, ItemsNeededSimResult* result,
                         std::string* error);

}  // namespace paritas::synthetic

#endif  // PARITAS_BENCH_ITEMS_NEEDED_SIM_H_
