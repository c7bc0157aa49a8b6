// How many items to price: from a sensitivity run's bootstrap standard errors
// (and its coverage curve, as a check of the law used), the number of items
// per heading that would bring the standard error of ln parity down (or up)
// to a target, for every basic heading, every top-level aggregate and the
// root. This is paritas's own method, not a published one; its assumptions:
//   1. Items are a random sample from a large pool of items of the heading,
//      so the variance of a heading's ln parity is S^2 / n for n items
//      (S^2: the variance one item contributes), and a survey pricing c x n
//      items has variance S^2 / (c n): the bootstrap's SE^2 shrinks by c.
//   2. Headings are sampled independently, and an aggregate's items grow in
//      proportion in all its headings (each heading's n times the same c),
//      so the aggregate's variance, a sum over its headings of weighted
//      heading variances, also shrinks by c (for weights that do not depend
//      on the items drawn; expenditure weights do not).
//   3. Uncertainty that items do not carry (external heading parities drawn
//      with their standard errors) is treated as if it shrank with items
//      too; nodes holding such headings are flagged (num_headings_external).
// The coverage curve checks assumption 1 on the survey itself: keeping m of
// n items without replacement gives Var = S^2 (1/m - 1/n) = (S^2 / n)
// (n/m - 1) (Cochran 1977, Sampling Techniques, 3rd ed., Theorem 2.2, with
// the n priced items as the population), so a least-squares fit of the
// curve's variances on (n/m - 1) through the origin estimates S^2 / n, the
// variance at the current n, independently of the bootstrap.
#ifndef PARITAS_UNCERTAINTY_ITEMS_NEEDED_H_
#define PARITAS_UNCERTAINTY_ITEMS_NEEDED_H_

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "paritas/survey/survey.h"
#include "paritas/uncertainty/sensitivity.h"

namespace paritas {

// Largest count of items per heading the table states (10^12). A plan
// beyond it asks for more items than any heading has; its count is left
// out (factor_median and factor_all still give the scale) rather than
// printed with digits that carry no meaning.
inline constexpr int64_t kMaxItemsPlanned = 1'000'000'000'000;

// One node of the items-needed table. Regions counted are those whose
// bootstrap standard error is finite and above 0 (the reference region of a
// region reference has 0 and is left out).
struct ItemsNeededRow {
  int node = -1;            // classification node index
  bool is_heading = false;  // a basic heading (else the root or a top aggregate)
  int num_headings = 0;     // basic headings under the node
  // Headings of the node taken from the external parities file (their
  // standard errors do not shrink with items; see assumption 3).
  int num_headings_external = 0;
  // Mean over the node's headings with prices of their items with prices
  // (n_h); for a heading, its n (0 for a heading taken wholly from the
  // external file).
  double items_now = 0.0;
  int num_regions = 0;  // regions with a standard error
  // Median and largest over regions of the bootstrap standard error of ln
  // parity now, log points; NaN when no region has one.
  double log_se_median = 0.0;
  double log_se_max = 0.0;
  // Median over regions of the standard error at the current n implied by
  // the coverage curve (see the file comment); NaN without a coverage curve
  // or without a level below 100 % of the items.
  double curve_log_se_median = 0.0;
  // Median over regions of curve SE / bootstrap SE: near 1 when the 1/n law
  // holds on this survey; NaN as above.
  double curve_ratio_median = 0.0;
  // Factor c = (SE / target)^2 on every heading's items for the median
  // region and for the worst region (every region at or below the target).
  double factor_median = 0.0;
  double factor_all = 0.0;
  // Items per heading for the median region and for every region to reach
  // the target: ceil(c x items_now), at least 2; 0 when no region has a
  // standard error or no item is priced; empty when the count would exceed
  // kMaxItemsPlanned. Below items_now when the survey is more precise than
  // the target.
  std::optional<int64_t> items_for_median = 0;
  std::optional<int64_t> items_for_all = 0;
  // Regions whose standard error is already at or below the target.
  int num_regions_at_target = 0;
};

// Returns the rows for the root, then the root's aggregate children, then
// every basic heading, each group in classification order. Needs the
// bootstrap (result.boot_log_se and result.heading_num_items filled); the
// coverage curve is used when present. `target_log_se` > 0.
std::vector<ItemsNeededRow> ItemsNeeded(const Survey& survey, const SensitivityResult& result,
                                        double target_log_se);

// sensitivity/items_needed.csv: node,kind,num_headings,num_headings_external,
// items_now,num_regions,log_se_median,log_se_max,curve_log_se_median,
// curve_ratio_median,target_log_se,factor_median,factor_all,items_for_median,
// items_for_all,num_regions_at_target. kind is "root", "aggregate" or
// "heading". A count above kMaxItemsPlanned is an empty field.
std::string ItemsNeededCsv(const Survey& survey, const std::vector<ItemsNeededRow>& rows,
                           double target_log_se);

// A few lines for the terminal: the root and the top aggregates, and the
// headings needing the most items; "over 10^12" for a count left out, and a
// line saying how many nodes have one.
std::string ItemsNeededSummary(const Survey& survey, const std::vector<ItemsNeededRow>& rows,
                               double target_log_se);

}  // namespace paritas

#endif  // PARITAS_UNCERTAINTY_ITEMS_NEEDED_H_
