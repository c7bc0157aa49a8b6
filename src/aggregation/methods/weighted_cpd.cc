// weighted-cpd: the CPD regression of ln heading parity on region and
// heading effects, weighted by expenditure shares (Rao 2005; Diewert 2005).
// The fit reuses the elementary CPD, whose normal equations already have
// the region-block / item-block structure (headings play the items), so the
// cost is cells x min(R, H) + min(R, H)^3. Unlinked groups are fitted one by
// one, so each has parities of its own as GEKS gives them.
#include <cmath>
#include <limits>
#include <vector>

#include "paritas/aggregation/aggregation.h"
#include "base/not_a_number.h"
#include "paritas/elementary/cpd.h"

namespace paritas {
namespace {

bool UsableCell(const NodeArrays& arrays, int r, int h) {
  const double p = arrays.price(r, h), e = arrays.expenditure(r, h);
  return std::isfinite(p) && p > 0 && std::isfinite(e) && e > 0;
}

// The cells of one fit: region, heading, ln parity and weight.
struct Cells {
  std::vector<int> region, heading;
  std::vector<double> log_price, weight;
};

// Fits the regions `members` (all of them when empty) and writes their ln
// parities, mean 0 over those with cells, into `log_parity`; they stay NaN
// if the linked group's normal equations fail numerically.
void FitCells(const Cells& all, int num_regions, int num_headings, const std::vector<int>& members,
              Eigen::VectorXd* log_parity) {
  std::vector<char> in(num_regions, members.empty() ? 1 : 0);
  for (int r : members) in[r] = 1;
  Cells cells;
  for (size_t k = 0; k < all.region.size(); ++k) {
    if (!in[all.region[k]]) continue;
    cells.region.push_back(all.region[k]);
    cells.heading.push_back(all.heading[k]);
    cells.log_price.push_back(all.log_price[k]);
    cells.weight.push_back(all.weight[k]);
  }
  const CpdData data{num_regions,   num_headings,    cells.region,
                     cells.heading, cells.log_price, cells.weight};
  CpdOptions options;
  options.compute_standard_errors = false;
  const CpdResult fit = FitCpd(data, options);
  if (!fit.identified) return;
  for (int r = 0; r < num_regions; ++r) {
    if (in[r] && std::isfinite(fit.log_parity(r))) (*log_parity)(r) = fit.log_parity(r);
  }
}

}  // namespace

Eigen::MatrixXd OwnExpenditureShares(const NodeArrays& arrays) {
  const Eigen::Index num_regions = arrays.price.rows(), num_headings = arrays.price.cols();
  Eigen::MatrixXd share = Eigen::MatrixXd::Constant(num_regions, num_headings, kNaN);
  for (int r = 0; r < num_regions; ++r) {
    double total = 0.0;
    for (int h = 0; h < num_headings; ++h) {
      if (UsableCell(arrays, r, h)) total += arrays.expenditure(r, h);
    }
    for (int h = 0; h < num_headings; ++h) {
      if (UsableCell(arrays, r, h)) share(r, h) = arrays.expenditure(r, h) / total;
    }
  }
  return share;
}

AggregateParities WeightedCpd(const NodeArrays& arrays, const Eigen::MatrixXd& weight) {
  const int num_regions = static_cast<int>(arrays.price.rows());
  const int num_headings = static_cast<int>(arrays.price.cols());
  Cells cells;
  for (int r = 0; r < num_regions; ++r) {
    for (int h = 0; h < num_headings; ++h) {
      if (!UsableCell(arrays, r, h) || !std::isfinite(weight(r, h)) || weight(r, h) <= 0) continue;
      cells.region.push_back(r);
      cells.heading.push_back(h);
      cells.log_price.push_back(std::log(arrays.price(r, h)));
      cells.weight.push_back(weight(r, h));
    }
  }
  AggregateParities out;
  out.log_parity = Eigen::VectorXd::Constant(num_regions, kNaN);
  out.groups = LinkedRegionGroups(num_regions, num_headings, cells.region, cells.heading);
  out.identified = out.groups.size() == 1;
  if (out.identified) {
    FitCells(cells, num_regions, num_headings, {}, &out.log_parity);
  } else {
    for (const std::vector<int>& group : out.groups) {
      FitCells(cells, num_regions, num_headings, group, &out.log_parity);
    }
  }
  return out;
}

namespace internal {
namespace {

class WeightedCpdMethod final : public AggregationMethod {
 public:
  std::string_view Name() const override { return "weighted-cpd"; }
  std::string_view Description() const override {
    return "CPD regression of heading parities weighted by each region's expenditure shares";
  }
  std::string_view ReportTitle() const override { return "Weighted CPD"; }
  std::string_view ReportHtml() const override {
    return "The log heading parities are regressed on region and heading effects by weighted least "
           "squares, each cell weighted by the region's expenditure share of the heading within "
           "the "
           "node; the region effects are the parities. At the solution a region's parity is the "
           "share-weighted geometric mean of its heading parities over the heading effects, and "
           "each "
           "heading effect is the share-weighted geometric mean of the deflated heading parities. "
           "Rao, D.S.P. (2005), <i>Review of Income and Wealth</i> 51(4); Diewert, W.E. (2005), "
           "<i>Review of Income and Wealth</i> 51(4).";
  }
  AggregationProperties Properties() const override { return {}; }
  BilateralOptions BilateralsNeeded() const override {
    BilateralOptions none;
    none.laspeyres_paasche = none.fisher = none.tornqvist = none.num_matched = false;
    return none;
  }
  AggregateParities Aggregate(const NodeArrays& arrays, const BilateralMatrices&) const override {
    return WeightedCpd(arrays, OwnExpenditureShares(arrays));
  }
};

}  // namespace

const AggregationMethod& WeightedCpdAggregationMethod() {
  static const WeightedCpdMethod method;
  return method;
}

}  // namespace internal
}  // namespace paritas
