// Plausibility checks on a computed run: results that may be wrong are named,
// never published silently. Each check gives warnings of one kind, about a
// node and a region where it can; compute prints, records and marks them.
#ifndef PARITAS_COMPUTE_PLAUSIBILITY_H_
#define PARITAS_COMPUTE_PLAUSIBILITY_H_

#include <cstdint>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "paritas/compute/compute.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey.h"
#include "paritas/survey/survey_loader.h"
#include "paritas/uncertainty/outliers.h"

namespace paritas {

// One thing the user must know about a run.
struct RunWarning {
  // The check that raised it, one of WarningKinds() ("partial-basket", ...).
  std::string kind;
  // Classification node (heading or aggregate) code; empty when the warning
  // is not about one node.
  std::string node;
  // Region code; empty when not about one region.
  std::string region;
  // The sentence shown to the user.
  std::string text;
};

// The kinds in the order they are listed, each with a short label:
//   rejected-rows       invalid input rows left out (invalid_rows: skip)
//   duplicate-quotes    quote rows repeating an earlier row field for field
//   input               other things the loader noticed
//   computation         regions without parities, normalisation fallbacks
//   weights             headings without spending everywhere or in the reference
//   partial-basket      aggregates resting on part of a region's spending
//   missing-parity      regions spending on a heading without a parity, and
//                       parities filled by a missing_parities rule
//   single-item-heading headings with one item priced
//   thin-evidence       region parities on fewer than min_items items / min_quotes quotes
//   implausible-level   heading parities far from the region's other headings
//   large-spread        large Paasche-Laspeyres spreads
//   gross-outlier       cells or quotes far from the price the survey predicts
//   sensitivity         what the sensitivity parts met (replicates, method runs)
//   extrapolated        parities carried from a benchmark by price indices
//                       (paritas carry), and regions moved as the country
std::vector<std::string> WarningKinds();
// The label of a kind for people ("partial basket"); the kind itself when unknown.
std::string WarningLabel(const std::string& kind);

struct PlausibilityResult {
  std::vector<RunWarning> warnings;
  // Share of region r's spending on node n (classification order; rows =
  // nodes, columns = regions) that rests on headings where r has a parity
  // of its own (priced or external, not imputed): sum of its spending on those headings over its spending on
  // all the node's headings. 1 or 0 for a heading; NaN where the region
  // spends nothing on the node (or has no spending rows for it).
  Eigen::MatrixXd basket_share;
  // Kinds of the warnings about node n and region r, joined by ';' (empty
  // when none): the `warnings` column of parities.csv.
  std::vector<std::vector<std::string>> node_region_kinds;
};

// Runs the checks on a computed result: weights, partial basket, single-item
// headings, thin evidence, implausible levels and (for the nodes whose
// bilateral matrices were kept) large spreads.
PlausibilityResult CheckPlausibility(const Survey& survey, const ParityResult& result,
                                     const RunConfig& config);

// Adds one gross-outlier warning per cell or quote whose observed price is at
// least checks.gross_outlier_ratio away from its prediction (either way),
// worst first, and marks its heading and region. Returns how many.
int64_t AddGrossOutlierWarnings(const Survey& survey, const OutlierReport& outliers,
                                const CheckThresholds& checks, PlausibilityResult* plausibility);

// All warnings of a run in listing order: rejected rows and the loader's
// warnings, the computation's, then the plausibility checks' by kind.
std::vector<RunWarning> CollectWarnings(const LoadSummary& load,
                                        const std::vector<std::string>& compute_warnings,
                                        const PlausibilityResult& plausibility);

// Counts per kind, in WarningKinds() order, kinds without warnings left out.
std::vector<std::pair<std::string, int64_t>> CountWarnings(const std::vector<RunWarning>& warnings);

// The warnings for the terminal: "N warnings (every one in warnings.csv):",
// then per kind its label and count and up to `per_kind` of its sentences,
// with "... and K more" beyond. "no warnings" when there are none. The count
// printed is the number of warnings listed in warnings.csv.
std::string WarningsText(const std::vector<RunWarning>& warnings, size_t per_kind = 8);

// What strict mode says after writing a run it does not pass: the count
// per kind and where to look.
std::string StrictModeMessage(const std::vector<RunWarning>& warnings);

// warnings.csv: kind,node,region,message, one row per warning.
std::string WarningsCsv(const std::vector<RunWarning>& warnings);

}  // namespace paritas

#endif  // PARITAS_COMPUTE_PLAUSIBILITY_H_
