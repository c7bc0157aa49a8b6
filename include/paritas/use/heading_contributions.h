// Why a region is dear: the ln parity of every region at every node, split
// into one additive contribution per basic heading of the node, so that
// "region r is 12 % dearer than the reference" reads as "housing adds 8
// points, food 3, transport 1, ...".
//
// The split has two parts per heading, which add up exactly:
//
// * The price part: the Törnqvist form of the comparison with the
//   reference. Against a reference region b it is the term `pair` shows,
//     price_h = ½ (s_rh + s_bh) ln(p_rh / p_bh),
//   s the expenditure shares over the headings both regions have, p the
//   heading parities: the log Törnqvist index written as a weighted sum of
//   log price relatives (TornqvistLogContributions, index_formulas.h).
//   Against a mean of the regions (reference mean,
//   weighted-mean or country) it is the same term averaged over every region
//   s with a parity at the node (r itself included, adding 0; shares
//   renormalised to the headings each pair has),
//     price_h = mean_s ½ (s_rh + s_sh) ln(p_rh / p_sh),
//   the contribution of heading h to the GEKS-Törnqvist parity, which is the
//   geometric mean of the bilateral Törnqvist indices against every region
//   (GEKS: Gini 1931; Eltetö and Köves 1964; Szulc 1964; over Törnqvist
//   indices, the multilateral index of Caves, Christensen and Diewert 1982,
//   Economic Journal 92, 73-86). That is "against the average region".
// * The adjustment: whatever the price parts leave of ln(parity / 100),
//     adjustment_h = w_h (ln(parity_r / 100) - sum_k price_k),
//   spread over the headings in proportion to their weight w_h (the
//   mean of the region's and the reference's shares, ½ (s_rh + s_bh), or
//   ½ (s_rh + mean_s s_sh) against a mean), as if every heading's price
//   were moved by the same factor. It is zero to rounding under
//   geks-tornqvist with reference mean whenever every pair of regions shares
//   a heading at the node (the GEKS closed form); otherwise it holds what the
//   aggregation method, the normalisation (weighted-mean, country) and
//   GEKS's least squares over missing pairs add.
//
// The contributions therefore sum to ln(parity / 100) of the region at the
// node exactly (to rounding), whatever the aggregation method.
#ifndef PARITAS_USE_HEADING_CONTRIBUTIONS_H_
#define PARITAS_USE_HEADING_CONTRIBUTIONS_H_

#include <string>
#include <vector>

#include "paritas/compute/compute.h"
#include "paritas/output/run_folder.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey.h"

namespace paritas {

// One heading's contribution to one region's ln parity at one node.
struct HeadingContribution {
  int heading = -1;  // basic heading index (survey order)
  // The region's expenditure share within the node, over the headings it
  // has a parity for and the reference has too (sums to 1 over them).
  double share = 0.0;
  // The heading's weight in the price part, ½ (s_rh + s_bh) against a
  // region, ½ (s_rh + mean_s s_sh) against a mean; sums to 1 over the
  // region's headings.
  double weight = 0.0;
  // The region's heading parity (reference = 100).
  double heading_parity = 0.0;
  double price_part = 0.0;  // see the file comment (log points / 100)
  double adjustment = 0.0;
  double log_contribution = 0.0;  // price_part + adjustment
};

// The contributions of every heading to one region's ln parity at a node.
struct RegionContributions {
  int node = -1;    // classification node index
  int region = -1;  // region index
  // ln(parity / 100) of the region at the node: the sum of the
  // log_contribution of `headings`.
  double log_parity = 0.0;
  // Headings of the node with a parity for the region and the reference,
  // in classification order. Headings without one contribute nothing and
  // are not listed; their effect is part of the adjustment.
  std::vector<HeadingContribution> headings;
};

struct ContributionTable {
  // What the price parts compare with: "region 'cap'" or "the average
  // region" (mean, weighted-mean and country references).
  std::string base;
  bool against_region = false;
  // Node-major (classification order), then regions in survey order; only
  // regions with a parity at the node.
  std::vector<RegionContributions> rows;
};

// Computes the contributions for every node and every region with a parity
// there. Against the average region a node costs regions x headings when
// every region has every heading parity, and up to regions² x headings
// when many miss one (their pairs are visited one by one). `reference` is the run's
// (ComputeOptions::reference); a node whose reference region has no parity there (reference_used
// "mean (reference region absent)") is split against the average region.
// `num_threads`: worker threads (0 = all cores, OpenMP's default); the rows
// do not depend on it.
ContributionTable HeadingContributions(const Survey& survey, const ParityResult& result,
                                       const Reference& reference, int num_threads = 0);

// contributions.csv: node,region,heading,share,weight,heading_parity,
// price_part,adjustment,log_contribution; one row per node x region with a
// parity x heading of the node the region and the reference have. A node's
// rows for a region sum (log_contribution) to ln(parity / 100) in
// parities.csv. Numbers in shortest exact form.
std::string ContributionsCsv(const Survey& survey, const ContributionTable& table);
// As ContributionsCsv, handed to `emit` in blocks as they are formatted.
void ContributionsCsvBlocks(const Survey& survey, const ContributionTable& table,
                            const TextBlocks& emit);

}  // namespace paritas

#endif  // PARITAS_USE_HEADING_CONTRIBUTIONS_H_
