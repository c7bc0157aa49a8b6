// Aggregates are computed from the basic headings directly rather than from
// child aggregates, so every node's parities are results of their own and do
// not depend on how the tree is nested above the headings.
#include "paritas/aggregation/aggregation.h"

#include <cmath>
#include <utility>

namespace paritas {

BilateralMatrices NodeBilaterals(const NodeArrays& arrays, const BilateralOptions& options) {
  return AllPairsWeighted(arrays.price, arrays.expenditure, options);
}

AggregateParities GeksOverIndex(const Eigen::MatrixXd& index) {
  AggregateParities out;
  const GeksResult geks = Geks(index.array().log().matrix());
  out.log_parity = geks.log_parity;
  out.identified = geks.identified;
  out.groups = geks.groups;
  out.complete = geks.complete;
  out.rms_log_residual = geks.rms_log_residual;
  return out;
}

namespace {

// Below a few hundred regions the matrices fit in cache and the blocks'
// products cost more than they save (aggregation_bench --geks-fisher, one
// thread: 200 x 100 took 1.9 ms by matrix and 3.1 ms by blocks, 400 x 100
// 13.3 and 13.6 ms, 500 x 100 14.1 and 12.9 ms).
constexpr Eigen::Index kMinRegionsForBlocks = 400;

// An aggregate's parities from GEKS's result.
AggregateParities FromGeks(GeksResult geks) {
  AggregateParities out;
  out.log_parity = std::move(geks.log_parity);
  out.identified = geks.identified;
  out.groups = std::move(geks.groups);
  out.complete = geks.complete;
  out.rms_log_residual = geks.rms_log_residual;
  return out;
}

// GEKS over `index` (B, filled in `bilaterals` or not): over the matrix
// when it is there; else by row blocks from 400 regions on when every pair
// has an index; else over the matrix formed here.
AggregateParities GeksOverArrays(GeksIndex index, const NodeArrays& arrays,
                                 const BilateralMatrices& bilaterals) {
  const bool fisher = index == GeksIndex::kFisher;
  const Eigen::MatrixXd& given = fisher ? bilaterals.fisher : bilaterals.tornqvist;
  if (given.size() > 0) return GeksOverIndex(given);
  GeksResult geks;
  GeksBlockOptions blocks;
  blocks.num_threads = arrays.num_threads;
  if (arrays.price.rows() < kMinRegionsForBlocks ||
      !GeksByRowBlocks(index, arrays.price, arrays.expenditure, blocks, &geks)) {
    const BilateralMatrices formed =
        AllPairsWeighted(arrays.price, arrays.expenditure,
                         fisher ? BilateralOptions::OnlyFisher() : BilateralOptions::OnlyTornqvist());
    return GeksOverIndex(fisher ? formed.fisher : formed.tornqvist);
  }
  return FromGeks(std::move(geks));
}

// Counts the headings each region has (parity and positive expenditure).
void CountHeadings(const NodeArrays& arrays, AggregateParities* out) {
  const int num_regions = static_cast<int>(arrays.price.rows());
  out->num_headings = Eigen::VectorXi::Zero(num_regions);
  for (int r = 0; r < num_regions; ++r) {
    for (int h = 0; h < arrays.price.cols(); ++h) {
      const double p = arrays.price(r, h), e = arrays.expenditure(r, h);
      if (std::isfinite(p) && p > 0 && std::isfinite(e) && e > 0) ++out->num_headings(r);
    }
  }
}

}  // namespace

AggregateParities GeksFisher(const NodeArrays& arrays, const BilateralMatrices& bilaterals) {
  return GeksOverArrays(GeksIndex::kFisher, arrays, bilaterals);
}

AggregateParities GeksTornqvist(const NodeArrays& arrays, const BilateralMatrices& bilaterals) {
  return GeksOverArrays(GeksIndex::kTornqvist, arrays, bilaterals);
}

AggregateParities AggregateFromBilaterals(const NodeArrays& arrays,
                                          const BilateralMatrices& bilaterals,
                                          const AggregationMethod& method) {
  AggregateParities out = method.Aggregate(arrays, bilaterals);
  CountHeadings(arrays, &out);
  return out;
}

bool GeksFisherWithSpreads(const NodeArrays& arrays, const SpreadOptions& spread_options,
                           AggregateParities* aggregate, SpreadSummary* spreads) {
  // As GeksOverArrays: by row blocks from a few hundred regions on.
  if (arrays.price.rows() < kMinRegionsForBlocks) return false;
  GeksResult geks;
  SpreadSummary summary;
  // The caller's thread count, not OpenMP's default: a node loop of one
  // aggregate has set that to 1 (KeepEigenOnThisThread), which would leave
  // the root's blocks, most of the stage, on one core.
  GeksBlockOptions blocks;
  blocks.num_threads = spread_options.num_threads;
  if (!GeksFisherAndSpreadsByRowBlocks(arrays.price, arrays.expenditure, blocks, spread_options,
                                       &geks, &summary)) {
    return false;
  }
  *aggregate = FromGeks(std::move(geks));
  CountHeadings(arrays, aggregate);
  *spreads = std::move(summary);
  return true;
}

Eigen::MatrixXd RealByHeading(const NodeArrays& arrays, const Eigen::VectorXd& log_parity,
                              const AggregationMethod& method) {
  const Eigen::VectorXd pi = method.InternationalPrices(arrays, log_parity);
  if (pi.size() == 0) return {};
  const Eigen::Index num_regions = arrays.price.rows(), num_headings = arrays.price.cols();
  Eigen::MatrixXd real = Eigen::MatrixXd::Constant(num_regions, num_headings, std::nan(""));
  for (Eigen::Index r = 0; r < num_regions; ++r) {
    if (!std::isfinite(log_parity(r))) continue;
    for (Eigen::Index h = 0; h < num_headings; ++h) {
      const double p = arrays.price(r, h), e = arrays.expenditure(r, h);
      if (!std::isfinite(e)) continue;
      const bool priced = std::isfinite(p) && p > 0 && e > 0 && std::isfinite(pi(h));
      real(r, h) = priced ? pi(h) * (e / p) : e / std::exp(log_parity(r));
    }
  }
  return real;
}

}  // namespace paritas
