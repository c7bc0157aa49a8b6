// A bilateral comparison of two regions with every index formula side by
// side, beside the transitive (multilateral) parity, so the effect of the
// formula and of transitivity can be seen, and the headings that drive the
// gap are listed first.
//
// At an aggregate the "prices" are the basic-heading parities (ratio scale)
// and the "quantities" expenditure / parity, over the headings with a parity
// and positive expenditure in both regions; at a basic heading the prices
// are the cell prices (geometric mean of the quotes) of the items both
// regions priced. The formulas are those of index_formulas.h.
#ifndef PARITAS_USE_PAIR_COMPARISON_H_
#define PARITAS_USE_PAIR_COMPARISON_H_

#include <limits>
#include <string>
#include <vector>

#include "paritas/compute/compute.h"
#include "paritas/survey/survey.h"

namespace paritas {

// What one basic heading (at an aggregate) or item (at a heading)
// contributes to the comparison of region b ("to") with region a ("from").
struct PairContribution {
  std::string code;  // heading code (aggregate) or item code (heading)
  // Expenditure shares over the matched headings; NaN at a heading.
  double share_from = 0.0;
  double share_to = 0.0;
  // p_b / p_a of the heading or item.
  double price_relative = 0.0;
  // Aggregate: additive contribution to ln Törnqvist, ½ (s_a + s_b) ln r.
  // Heading: contribution to ln Jevons, ln r / n. These sum to the log
  // index exactly (up to rounding).
  double log_contribution = 0.0;
  // Aggregate: contribution to Fisher - 1 in the additive decomposition of
  // Reinsdorf, Diewert and Ehemann (2002) (see FisherContributions); they
  // sum to Fisher - 1. NaN at a heading.
  double fisher_contribution = 0.0;
};

// The transitive parity of a pair under one method.
struct MethodTransitive {
  std::string method;  // registry name
  // parity(b) / parity(a) under the method (ratio scale); NaN when the
  // method gave either region no parity or failed.
  double transitive = 0.0;
  // Why the method gave no parities (its computation's message); else empty.
  std::string failure;
};

struct PairComparison {
  std::string node;  // node code
  // The node's label (classification.h); empty when it has none.
  std::string node_label;
  bool is_heading = false;
  // True when the node is an analytic group (an aggregate outside the tree).
  bool is_group = false;
  std::string from;  // region a
  std::string to;    // region b
  // Headings (aggregate) or items (heading) matched in both regions.
  int num_matched = 0;

  // Basic heading: unweighted formulas over the matched items (NaN at an
  // aggregate).
  double jevons = 0.0;
  double dutot = 0.0;  // ratio of average prices
  double carli = 0.0;  // average of price relatives

  // Aggregate: price indices of b relative to a (NaN at a heading).
  double laspeyres = 0.0;
  double paasche = 0.0;
  double fisher = 0.0;
  double tornqvist = 0.0;
  double walsh = 0.0;
  // Expenditure of b / expenditure of a over the matched headings.
  double value_ratio = 0.0;
  // Quantity (volume) indices implied by each price index: value_ratio /
  // price index. implied_quantity_laspeyres is the Paasche quantity index
  // and vice versa.
  double implied_quantity_laspeyres = 0.0;
  double implied_quantity_paasche = 0.0;
  double implied_quantity_fisher = 0.0;
  double implied_quantity_tornqvist = 0.0;
  double implied_quantity_walsh = 0.0;
  // The Fisher quantity index computed directly (Fisher with prices and
  // quantities swapped); fisher * fisher_quantity = value_ratio (the
  // product test).
  double fisher_quantity = 0.0;
  // |ln(Laspeyres / Paasche)|: large when price and spending patterns differ.
  double log_spread = 0.0;

  // Transitive parity of b relative to a from compute: parity(b) /
  // parity(a) at the node (ratio scale); NaN where either has none.
  double transitive = 0.0;
  // ln(bilateral / transitive), the bilateral being Fisher at an aggregate
  // and Jevons at a heading: what transitivity costs this pair.
  double log_gap = 0.0;

  // Sorted by |log_contribution|, largest first (ties by code).
  std::vector<PairContribution> contributions;

  // At a heading where either region's parity is not from its quotes
  // (external file or a missing-parity rule): says so, since the items
  // compared then do not give the transitive parity. Empty otherwise.
  std::string source_note;

  // Filled by TransitiveUnderEveryMethod (pair --every-method), else empty.
  std::vector<MethodTransitive> by_method;

  // The interval of parity(to) / parity(from) from the sensitivity results
  // of the same run (LookUpPairInterval); NaN and 0 when none is used.
  double ratio_lower = std::numeric_limits<double>::quiet_NaN();
  double ratio_upper = std::numeric_limits<double>::quiet_NaN();
  int ratio_num_replicates = 0;
  double ratio_level = 0.0;          // share, e.g. 0.95
  std::string ratio_run_id;          // the sensitivity run's id
  std::string ratio_source;          // file of the sensitivity folder read
  // Why no interval is shown (no sensitivity results, another run's, not
  // covered); empty when one is shown or none was looked for.
  std::string ratio_note;
};

// What LookUpPairInterval found.
enum class PairIntervalStatus {
  kFound,       // the interval is in the comparison
  kNoResults,   // no sensitivity run in the run folder (or without bootstrap)
  kOtherRun,    // refused: the results belong to another run
  kNotCovered,  // same run, but it holds no interval for this pair and node
  kUnreadable,  // a file of the sensitivity folder could not be read
};

// Looks for the interval of the comparison's ratio parity(to) / parity(from)
// in <run_folder>/sensitivity: first in pair_ratios.csv (root and top-level
// aggregates), else from replicates.bin (any node, when written). The
// results are used only when they are of the same run: the sensitivity run
// must rest on the same inputs and settings as `this_run_json` (the run
// record of the comparison; RunDifferences), and when <run_folder>/run.json
// exists, the sensitivity run must have been made beside that compute run
// (its compute_run.run_id equals the compute run's run_id). Otherwise the
// interval is refused with a message saying why. Fills the ratio_* fields
// of `comparison` (ratio_note when nothing is shown) and returns the status.
PairIntervalStatus LookUpPairInterval(const std::string& run_folder,
                                      const std::string& this_run_json, const Survey& survey,
                                      PairComparison* comparison);

// Compares region `to` with region `from` at `node` (a classification code or
// a group's; empty = the root). Returns false with a message (unknown region or node,
// nothing matched) in `error`; never aborts on data.
bool ComparePair(const Survey& survey, const ParityResult& result, const std::string& from,
                 const std::string& to, const std::string& node, PairComparison* comparison,
                 std::string* error);

// Fills comparison->by_method with the pair's transitive parity at its node
// under every registered method of the node's family: every aggregation
// method (with the run's elementary method) at an aggregate, every
// elementary method (with the run's aggregation method) at a basic heading.
// Each method is a full compute, so this costs about one compute per method.
void TransitiveUnderEveryMethod(const Survey& survey, const ComputeOptions& options,
                                PairComparison* comparison);

// CSV with columns measure,value: rows `from`, `to` and `node` (codes), a row
// `node_label` when the node has a label, then
// one row per formula or quantity (e.g. `fisher,1.401050`, 6 decimals;
// counts as integers, an absent value as an empty cell), then the
// contributions: at an aggregate `tornqvist_log_contribution:<heading>` rows
// sorted by size, then `fisher_contribution:<heading>` rows sorted by
// theirs; at a heading `jevons_log_contribution:<item>` rows; with
// by_method, `transitive_by_method:<method>` rows last, in registry order.
std::string PairCsv(const PairComparison& comparison);

// The terminal table: formulas side by side, then the contributions.
std::string PairTable(const PairComparison& comparison);

}  // namespace paritas

#endif  // PARITAS_USE_PAIR_COMPARISON_H_
