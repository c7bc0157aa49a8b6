// Aggregate parities: for an inner node of the classification, the method
// the run names (aggregation_method.h lists them) applied to the node's basic
// headings directly, with heading parities as prices and expenditure /
// parity as quantities.
#ifndef PARITAS_AGGREGATION_AGGREGATION_H_
#define PARITAS_AGGREGATION_AGGREGATION_H_

#include <string_view>
#include <vector>

#include <Eigen/Core>

#include "paritas/aggregation/aggregation_method.h"
#include "paritas/aggregation/bilateral_matrix.h"
#include "paritas/aggregation/geks.h"

namespace paritas {

// Computes the bilateral matrices of a node: all of them by default, or
// those `options` asks for.
BilateralMatrices NodeBilaterals(const NodeArrays& arrays,
                                 const BilateralOptions& options = BilateralOptions());

// Computes a node's parities with `method` from bilateral matrices that hold
// at least method.BilateralsNeeded(), and counts the headings each region
// has (parity and positive expenditure).
AggregateParities AggregateFromBilaterals(const NodeArrays& arrays,
                                          const BilateralMatrices& bilaterals,
                                          const AggregationMethod& method);

// GEKS over one all-pairs bilateral index matrix (ratio scale): the shared
// core of the geks-* methods.
AggregateParities GeksOverIndex(const Eigen::MatrixXd& index);

// GEKS over bilateral Fisher indices (the geks-fisher method) and over
// Törnqvist indices (geks-tornqvist): over `bilaterals.fisher` (or
// `.tornqvist`) when it is filled, else, from 400 regions on, by row blocks
// from the node's arrays (GeksByRowBlocks: no region x region matrix) when
// every pair has an index, else over the index matrix computed here. The
// three give the same bits.
AggregateParities GeksFisher(const NodeArrays& arrays, const BilateralMatrices& bilaterals);
AggregateParities GeksTornqvist(const NodeArrays& arrays, const BilateralMatrices& bilaterals);

// AggregateFromBilaterals(arrays, {}, the geks-fisher method) together with
// the node's spread summary AllPairsSpreads(arrays.price,
// arrays.expenditure, spread_options), both from the same row-block
// products (GeksFisherAndSpreadsByRowBlocks), when GeksFisher runs by row
// blocks (from 400 regions on, every pair with an index); the same bits as
// the two apart. The blocks run on spread_options.num_threads threads (0 =
// OpenMP's default; on the calling thread inside an active parallel
// region). Returns false, leaving both untouched, otherwise.
bool GeksFisherWithSpreads(const NodeArrays& arrays, const SpreadOptions& spread_options,
                           AggregateParities* aggregate, SpreadSummary* spreads);

// Returns each region's expenditure share of each heading, s_rh = e_rh /
// sum_h' e_rh' over the headings the region has (finite parity > 0 and
// expenditure > 0); NaN elsewhere. Rows of shares sum to 1.
Eigen::MatrixXd OwnExpenditureShares(const NodeArrays& arrays);

// Computes the weighted CPD of a node (Rao 2005; Diewert 2005): the weighted
// least squares fit of ln p_rh = ln PPP_r + ln pi_h + e_rh over the cells
// with a parity > 0, expenditure > 0 and a finite weight w_rh > 0
// (`weight` is regions x headings). With w = OwnExpenditureShares the
// solution is the Rao (2005) system
//   ln PPP_r = sum_h s_rh (ln p_rh - ln pi_h),
//   ln pi_h  = sum_r s_rh (ln p_rh - ln PPP_r) / sum_r s_rh;
// for two regions with w_rh = (s_1h + s_2h) / 2 it gives the Törnqvist index
// (Diewert 2005, Review of Income and Wealth 51(4)). ln parities have mean 0
// over the regions with cells; regions not linked through common headings
// give identified = false, the groups, and parities fitted within each group
// (mean 0 in each).
AggregateParities WeightedCpd(const NodeArrays& arrays, const Eigen::MatrixXd& weight);

// Computes parities by chaining bilateral Fisher indices along the minimum
// spanning tree of the Paasche-Laspeyres spread PLS(a, b) = |ln(L_ab /
// P_ab)| (Hill 1999, Review of Economics and Statistics 81(1), the PLS
// measure): ln PPP_b = ln PPP_a + ln F_ab along each edge a -> b. Reads
// `laspeyres`, `paasche` and `fisher`; pairs whose spread is not finite are
// not edges. Ties are broken by (smaller region index, larger region index).
// The tree is returned in `tree`; ln parities have mean 0 over the regions
// with a finite Fisher diagonal. Disconnected regions give identified =
// false, the groups and a spanning tree per group (mean 0 in each).
AggregateParities SpanningTree(const BilateralMatrices& bilaterals);

// Returns real expenditure by heading, regions x the node's headings, for an
// additive `method` given the node's normalised ln parities (ln(parity/100)):
// pi_h * q_rh with q_rh = e_rh / p_rh at the method's international prices
// where the region has a heading parity and positive expenditure, and
// e_rh / PPP_r (the node's parity) where it spends on a heading without a
// parity, so each row sums to the node's real expenditure E_r / PPP_r
// (Geary 1958; Khamis 1972: real expenditures at international prices add
// up over headings). NaN where the region has no parity or no expenditure
// on the heading. Empty (0 x 0) when the method is not additive.
Eigen::MatrixXd RealByHeading(const NodeArrays& arrays, const Eigen::VectorXd& log_parity,
                              const AggregationMethod& method);

}  // namespace paritas

#endif  // PARITAS_AGGREGATION_AGGREGATION_H_
