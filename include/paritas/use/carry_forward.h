// Carrying benchmark heading parities to a later period with regional price
// indices: the arithmetic of `paritas carry`, apart from reading runs and
// writing folders (jobs/carry_job.h), so it can be tested on numbers alone.
//
// A region's heading parity moves by its own price index relative to the
// country's movement in that heading:
//
//   ln p_rh(t) = ln p_rh(0) + ln I_rh(t) - ln C_h(t),
//   ln C_h(t)  = sum_r w_rh ln I_rh(t) / sum_r w_rh,
//
// I_rh(t) the region's index of heading h in period t with the benchmark
// period 0 as its reference, C_h the country's index, the weighted geometric
// mean of the regional indices with the benchmark's expenditure on h as
// weights w_rh (the country's price change in h as its spending then was
// spread over the regions, the log form matching the log scale of
// parities). C_h is one number per heading, so it changes no ratio between
// regions within the heading: the normalisation to the run's reference and
// every aggregation method used here (each invariant to the unit of a
// heading) remove it. It is reported so a reader sees each region's movement
// relative to the country's (I_rh / C_h), which is what moves its parity.
#ifndef PARITAS_USE_CARRY_FORWARD_H_
#define PARITAS_USE_CARRY_FORWARD_H_

#include <string>
#include <vector>

#include <Eigen/Core>

#include "paritas/base/read_limits.h"
#include "paritas/survey/classification.h"

namespace paritas {

// What to do with a region that has a benchmark parity in a heading but no
// index for it, neither for the heading nor for any aggregate above it.
enum class MissingIndexRule {
  // Refuse, naming the region and heading (default): a carried parity
  // without an index would be a guess the user did not ask for.
  kStop,
  // Take the region's movement in the heading to be the country's
  // (I_rh = C_h, its relative parity unchanged from the benchmark). Every
  // such region and heading raises an `extrapolated` warning, and C_h is
  // formed from the regions with an index only.
  kCountry,
};
// "stop", "country".
std::string ToString(MissingIndexRule rule);
// Case-insensitive; false for other text.
bool FromString(const std::string& text, MissingIndexRule* rule);
std::vector<std::string> MissingIndexRuleNames();

// The regional price indices of one period, resolved to every region x
// basic heading.
struct PriceIndexTable {
  // The period chosen (the file's only one, or the one asked for).
  std::string period;
  // Every period of the file, in order of first appearance.
  std::vector<std::string> periods;
  // Regions x headings (the orders given to ReadPriceIndices): the index of
  // the region in the heading, NaN where the file gives none for the
  // heading or for any aggregate above it.
  Eigen::MatrixXd index;
  // Node (classification index) whose row gave each entry; -1 where none.
  // The most specific wins: the heading's own row, else the nearest
  // aggregate above it.
  Eigen::MatrixXi from_node;
  int64_t num_rows_read = 0;        // data rows of the file
  int64_t num_rows_used = 0;        // rows of the chosen period
  int64_t num_rows_other_period = 0;
};

// Reads a price index file: comma-separated, header with the columns
// `region`, `node` (a basic heading or an aggregate of the tree), `period`
// (any text, e.g. 2025 or 2025Q3) and `index` (a positive number; the
// benchmark period = the index's reference, any common scale such as 100
// or 1). Every row of every period is checked. `period` empty = the file's
// only period (an error when it holds several). `regions` and `headings`
// (heading codes in classification order) fix the table's rows and
// columns. Returns false with a message naming the file, line and column,
// the value found and the rule broken: an unknown region or node (with the
// nearest name), an analytic group (not in the tree), a row repeating
// another's region, node and period, an index that is not a positive
// number.
bool ReadPriceIndices(const std::string& path, const ReadLimits& limits,
                      const Classification& classification,
                      const std::vector<std::string>& regions, const std::string& period,
                      PriceIndexTable* table, std::string* error);

// The carried heading parities, regions x headings.
struct CarriedHeadings {
  // ln p_rh(t) on the benchmark's scale; NaN where the benchmark has no
  // parity.
  Eigen::MatrixXd log_parity;
  // The index used for each region x heading (I_rh, or C_h under rule
  // country); NaN where the benchmark has no parity.
  Eigen::MatrixXd index_used;
  // Per heading: the country's index C_h; NaN when no region has both a
  // benchmark parity and an index.
  Eigen::VectorXd country_index;
  // Region x heading pairs given C_h by rule country, (region, heading).
  std::vector<std::pair<int, int>> filled_by_rule;
};

// Moves benchmark heading parities by the indices (the formula at the top).
// `benchmark_log_parity`, `index` and `weights` are regions x headings;
// weights are the benchmark's expenditure (NaN or 0 = no weight). When no
// region with an index has a positive weight in a heading, the regions with
// an index weigh alike there. Returns false with a message naming the first
// region and heading without an index under rule stop (and how many there
// are), a heading where nobody has an index under rule country, or the
// first carried parity beyond 1e-60 to 1e60 (the aggregation's products of
// ratios between regions could overflow; kCarriedRange in base/magnitude.h).
bool CarryHeadingParities(const Eigen::MatrixXd& benchmark_log_parity,
                          const Eigen::MatrixXd& index, const Eigen::MatrixXd& weights,
                          MissingIndexRule rule, const std::vector<std::string>& regions,
                          const std::vector<std::string>& headings, CarriedHeadings* carried,
                          std::string* error);

}  // namespace paritas

#endif  // PARITAS_USE_CARRY_FORWARD_H_
