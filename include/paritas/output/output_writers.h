// Output files of `paritas compute`: the parity table, parity matrices,
// bilateral tables and the terminal summary. Writers build text in memory
// (tests read it directly); WriteOutputFiles puts a set of files in place
// whole or not at all.
#ifndef PARITAS_OUTPUT_OUTPUT_WRITERS_H_
#define PARITAS_OUTPUT_OUTPUT_WRITERS_H_

#include <string>
#include <vector>

#include <Eigen/Core>

#include "paritas/aggregation/aggregation_method.h"
#include "paritas/aggregation/bilateral_matrix.h"
#include "paritas/compute/compute.h"
#include "paritas/compute/plausibility.h"
#include "paritas/output/run_folder.h"
#include "paritas/survey/survey.h"

namespace paritas {

// Decimals written for parities, indices and bilateral indices.
inline constexpr int kIndexDecimals = 6;
// Decimals written for money amounts (expenditure, real expenditure).
inline constexpr int kMoneyDecimals = 4;
// Decimals written for standard errors of ln parities.
inline constexpr int kLogDecimals = 8;

// Longest file name NodeFileName returns, in bytes (well under the 255 of
// common filesystems, leaving room for ".csv").
inline constexpr size_t kMaxNodeFileNameBytes = 200;

// A file name for a node code, one to one: ASCII letters, digits, '-', '_'
// and '.' (not leading) are kept, every other byte is written %XX (two
// upper-case hex digits), so "h 1" is "h%201" and distinct codes never share
// a file; an empty code is "%". A name longer than kMaxNodeFileNameBytes is
// cut and ends in "%~" and the code's SHA-256.
std::string NodeFileName(const std::string& code);

// Names a node for the terminal: "'all' (All items)", or "'all'" when it has
// no label (the label through VisibleText).
std::string NodeTitle(const Classification& classification, int node);

// parities.csv: one row per node x region, nodes in classification order
// (the tree's, then the groups), regions in survey order. Columns: node,
// kind (heading, aggregate or group), region, parity, expenditure,
// real_expenditure, real_per_capita_index, log_se, log_se_robust, rank,
// num_items, num_quotes, num_headings, label (the node's, empty when none).
// `plausibility` (may be null) adds the columns basket_share and warnings
// (the kinds of the warnings about the node and region, ';'-joined).
// `extrapolated_to` not empty (runs of `paritas carry`) adds a last column
// `extrapolated_to` holding it on every row: the period the benchmark's
// parities were carried to, so no row can be read as a benchmark figure.
std::string ParitiesCsv(const Survey& survey, const ParityResult& result,
                        const PlausibilityResult* plausibility = nullptr,
                        const std::string& extrapolated_to = "");
// As ParitiesCsv, handed to `emit` in blocks as they are formatted.
void ParitiesCsvBlocks(const Survey& survey, const ParityResult& result,
                       const PlausibilityResult* plausibility, const std::string& extrapolated_to,
                       const TextBlocks& emit);

// matrix/<node>.csv: header `region,` then the region codes (regions with a
// parity); cell (a, b) = 100 x parity(b) / parity(a).
std::string ParityMatrixCsv(const Survey& survey, const NodeResult& node);
// As ParityMatrixCsv, handed to `emit` in blocks as they are formatted.
void ParityMatrixCsvBlocks(const Survey& survey, const NodeResult& node, const TextBlocks& emit);

// Returns the numbers of matrix/<node>.csv as a matrix, rows and columns in
// the order of `*regions` (filled with the regions that have a parity, survey
// order): cell (a, b) = 100 x parity(b) / parity(a), bit for bit the CSV's
// values (the Python module hands it out as an array).
Eigen::MatrixXd ParityMatrix(const NodeResult& node, std::vector<int>* regions);

// bilateral/<aggregate>.csv: from,to,laspeyres,paasche,fisher,tornqvist,
// spread,num_headings for every ordered pair of distinct regions with a
// parity; spread = |ln(Laspeyres / Paasche)|.
std::string AggregateBilateralCsv(const Survey& survey, const NodeResult& node,
                                  const BilateralMatrices& bilaterals);
// As AggregateBilateralCsv, handed to `emit` in blocks as they are formatted.
void AggregateBilateralCsvBlocks(const Survey& survey, const NodeResult& node,
                                 const BilateralMatrices& bilaterals, const TextBlocks& emit);

// tree/<aggregate>.csv (spanning-tree only): one row per edge of the node's
// minimum spanning tree, from,to,spread_percent,fisher, in the order regions
// joined the tree; `to` joined through `from`, spread_percent = 100 |ln(L /
// P)| of the pair and fisher = the Fisher index of `to` against `from`.
std::string TreeCsv(const Survey& survey, const NodeResult& node);

// bilateral/<heading>.csv: from,to,jevons,num_items.
std::string HeadingBilateralCsv(const Survey& survey, const NodeResult& node,
                                const Eigen::MatrixXd& jevons, const Eigen::MatrixXi& num_items);
// As HeadingBilateralCsv, handed to `emit` in blocks as they are formatted.
void HeadingBilateralCsvBlocks(const Survey& survey, const NodeResult& node, const Eigen::MatrixXd& jevons,
                               const Eigen::MatrixXi& num_items, const TextBlocks& emit);

// representativity.csv, written under the cprd elementary method: one row
// per heading with parities. Columns: heading, effect (the representativity
// dummy's coefficient g in ln price; exp(g) - 1 is the premium of a
// representative item), log_se (its classic standard error), num_cells,
// num_cells_representative. effect and log_se are empty where the flags do
// not identify the effect (none flagged, or constant within every item).
std::string RepresentativityCsv(const Survey& survey, const ParityResult& result);

// real_by_heading.csv, written by the additive aggregation methods: one row
// per aggregate x region with a parity x heading of the aggregate on which
// the region spends. Columns: node, region, heading, real_expenditure,
// valued_at. real_expenditure is pi_h e_rh / p_rh at the method's
// international prices (valued_at = international_price) or, on a heading
// the region spends on without a parity, e_rh / (parity / 100)
// (valued_at = node_parity); a node's rows for a region sum to its
// real_expenditure in parities.csv (RealByHeading in aggregation.h).
std::string RealByHeadingCsv(const Survey& survey, const ParityResult& result,
                             const AggregationMethod& method);

// RegionSpread (bilateral_matrix.h) of every region from the full matrices.
std::vector<RegionSpread> RegionSpreads(const BilateralMatrices& bilaterals);

// The terminal table of the root node: regions sorted dearest first (with
// their names from regions.csv when any region has one), with parity, rank,
// real expenditure per head and the largest Paasche-Laspeyres spread in
// percent (100 |ln(L / P)|, 2 decimals) with its partner.
std::string RootTable(const Survey& survey, const ParityResult& result,
                      const std::vector<RegionSpread>& spreads);

}  // namespace paritas

#endif  // PARITAS_OUTPUT_OUTPUT_WRITERS_H_
