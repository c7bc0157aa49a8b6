// The additive methods share the parity equation, the linking of regions
// through shared headings and the fixed-point loop; the loop always runs,
// also from a direct solution, so every result passes the same convergence
// test and a failure is reported rather than returned as a number.
#include "aggregation/methods/additive.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>
#include <numeric>
#include <string>
#include <vector>

#include "base/not_a_number.h"

namespace paritas::internal {
namespace {

// Regions linked through shared headings, largest group first, members
// ascending; regions that take no part are in no group.
std::vector<std::vector<int>> LinkedGroups(const AdditiveCells& cells) {
  const int num_regions = static_cast<int>(cells.total.size());
  std::vector<int> parent(num_regions);
  std::iota(parent.begin(), parent.end(), 0);
  auto find = [&](int x) {
    while (parent[x] != x) x = parent[x] = parent[parent[x]];
    return x;
  };
  for (Eigen::Index h = 0; h < cells.quantity.cols(); ++h) {
    int first = -1;
    for (int r = 0; r < num_regions; ++r) {
      if (cells.quantity(r, h) <= 0) continue;
      if (first < 0) {
        first = r;
        continue;
      }
      const int a = find(first), b = find(r);
      if (a != b) parent[std::max(a, b)] = std::min(a, b);
    }
  }
  std::vector<std::vector<int>> by_root(num_regions);
  for (int r = 0; r < num_regions; ++r) {
    if (cells.total(r) > 0) by_root[find(r)].push_back(r);
  }
  std::vector<std::vector<int>> groups;
  for (auto& g : by_root) {
    if (!g.empty()) groups.push_back(std::move(g));
  }
  std::stable_sort(groups.begin(), groups.end(), [](const auto& x, const auto& y) {
    return x.size() != y.size() ? x.size() > y.size() : x.front() < y.front();
  });
  return groups;
}

// The cells restricted to the regions of one group.
AdditiveCells GroupCells(const AdditiveCells& cells, const std::vector<int>& group) {
  AdditiveCells sub;
  const Eigen::Index num_regions = cells.total.size(), num_headings = cells.quantity.cols();
  sub.expenditure = Eigen::MatrixXd::Zero(num_regions, num_headings);
  sub.inverse_price = sub.quantity = sub.share = sub.expenditure;
  sub.total = Eigen::VectorXd::Zero(num_regions);
  for (int r : group) {
    sub.expenditure.row(r) = cells.expenditure.row(r);
    sub.inverse_price.row(r) = cells.inverse_price.row(r);
    sub.quantity.row(r) = cells.quantity.row(r);
    sub.share.row(r) = cells.share.row(r);
    sub.total(r) = cells.total(r);
  }
  return sub;
}

// ln PPP_r = ln E_r - ln sum_h pi_h q_rh, centred to mean 0 over the regions
// that take part (NaN for the others).
Eigen::VectorXd CentredLogParity(const AdditiveCells& cells, const Eigen::VectorXd& pi) {
  const Eigen::VectorXd real = cells.quantity * pi.array().isFinite().select(pi, 0.0).matrix();
  Eigen::VectorXd log_parity = Eigen::VectorXd::Constant(cells.total.size(), kNaN);
  double sum = 0.0;
  int count = 0;
  for (Eigen::Index r = 0; r < log_parity.size(); ++r) {
    if (cells.total(r) <= 0) continue;
    log_parity(r) = std::log(cells.total(r)) - std::log(real(r));
    sum += log_parity(r);
    ++count;
  }
  if (count > 0) log_parity.array() -= sum / count;
  return log_parity;
}

// Ratio-scale parities, 0 for regions without a finite ln parity.
Eigen::VectorXd PppOf(const Eigen::VectorXd& log_parity) {
  return log_parity.array().isFinite().select(log_parity.array().exp(), 0.0).matrix();
}

// Iterates pi = prices(PPP), PPP = E / (q pi) from the method's start in
// one group; returns false with `failure` set when it does not converge.
bool SolveGroup(const AdditiveCells& cells, const AdditiveMethod& method,
                Eigen::VectorXd* log_parity, std::string* failure) {
  Eigen::VectorXd start;
  if (!method.start(cells, &start, failure)) return false;
  Eigen::VectorXd current = CentredLogParity(cells, start);
  double change = std::numeric_limits<double>::infinity();
  double previous_change = std::numeric_limits<double>::infinity();
  for (int iteration = 1; iteration <= kAdditiveMaxIterations; ++iteration) {
    const Eigen::VectorXd pi = method.prices(cells, PppOf(current));
    Eigen::VectorXd next = CentredLogParity(cells, pi);
    change = 0.0;
    bool finite = true;
    for (Eigen::Index r = 0; r < next.size(); ++r) {
      if (cells.total(r) <= 0) continue;
      finite = finite && std::isfinite(next(r));
      change = std::max(change, std::abs(next(r) - current(r)));
    }
    if (!finite) {
      *failure = std::string(method.name) +
                 " gave a parity that is not a finite number (an international price is zero or "
                 "not finite); the heading parities or expenditure may be extreme";
      return false;
    }
    current = std::move(next);
    // A step-size test alone passes far from the solution when the map
    // contracts slowly (regions linked through little spending): the
    // distance left is about change * rate / (1 - rate), rate estimated from
    // the last two steps; steps at rounding level end the loop.
    const double rate = change / previous_change;
    previous_change = change;
    const bool rounding = change < kAdditiveRoundingLevel;
    if (rounding || (rate < 1.0 && change * rate / (1.0 - rate) < kAdditiveTolerance &&
                     change < kAdditiveTolerance)) {
      *log_parity = std::move(current);
      return true;
    }
  }
  *failure = std::string(method.name) +
             " did not converge: the largest change of a ln parity was " + ScientificText(change) +
             " after " + std::to_string(kAdditiveMaxIterations) + " iterations (the test is " +
             ScientificText(kAdditiveTolerance) +
             "); regions linked through few shared headings converge slowly";
  return false;
}

}  // namespace

std::string ScientificText(double x) {
  char text[32];
  std::snprintf(text, sizeof text, "%.2g", x);
  return text;
}

AdditiveCells UsedCells(const NodeArrays& arrays) {
  const Eigen::Index num_regions = arrays.price.rows(), num_headings = arrays.price.cols();
  AdditiveCells cells;
  cells.expenditure = Eigen::MatrixXd::Zero(num_regions, num_headings);
  cells.inverse_price = cells.expenditure;
  for (Eigen::Index r = 0; r < num_regions; ++r) {
    for (Eigen::Index h = 0; h < num_headings; ++h) {
      const double p = arrays.price(r, h), e = arrays.expenditure(r, h);
      if (std::isfinite(p) && p > 0 && std::isfinite(e) && e > 0) {
        cells.expenditure(r, h) = e;
        cells.inverse_price(r, h) = 1.0 / p;
      }
    }
  }
  cells.quantity = cells.expenditure.cwiseProduct(cells.inverse_price);
  cells.total = cells.expenditure.rowwise().sum();
  const Eigen::VectorXd inverse_total =
      (cells.total.array() > 0).select(cells.total.cwiseInverse(), 0.0);
  cells.share = inverse_total.asDiagonal() * cells.expenditure;
  return cells;
}

AggregateParities SolveAdditive(const NodeArrays& arrays, const AdditiveMethod& method) {
  const AdditiveCells cells = UsedCells(arrays);
  AggregateParities out;
  out.log_parity = Eigen::VectorXd::Constant(cells.total.size(), kNaN);
  out.groups = LinkedGroups(cells);
  out.identified = out.groups.size() == 1;
  // Complete: every region that takes part uses every heading some region uses.
  const Eigen::Array<bool, 1, Eigen::Dynamic> used = (cells.quantity.array() > 0).colwise().any();
  out.complete = out.identified;
  for (Eigen::Index r = 0; out.complete && r < cells.total.size(); ++r) {
    if (cells.total(r) <= 0) continue;
    for (Eigen::Index h = 0; h < used.size(); ++h) {
      if (used(h) && cells.quantity(r, h) <= 0) out.complete = false;
    }
  }
  for (const std::vector<int>& group : out.groups) {
    Eigen::VectorXd log_parity;
    const bool solved =
        out.identified ? SolveGroup(cells, method, &log_parity, &out.failure)
                       : SolveGroup(GroupCells(cells, group), method, &log_parity, &out.failure);
    if (!solved) {
      out.log_parity.setConstant(kNaN);
      return out;
    }
    for (int r : group) out.log_parity(r) = log_parity(r);
  }
  return out;
}

Eigen::VectorXd InternationalPricesAt(const NodeArrays& arrays, const Eigen::VectorXd& log_parity,
                                      PriceEquation prices) {
  AdditiveCells cells = UsedCells(arrays);
  std::vector<int> with_parity;
  for (Eigen::Index r = 0; r < log_parity.size(); ++r) {
    if (std::isfinite(log_parity(r)) && cells.total(r) > 0)
      with_parity.push_back(static_cast<int>(r));
  }
  if (static_cast<Eigen::Index>(with_parity.size()) < log_parity.size()) {
    cells = GroupCells(cells, with_parity);
  }
  return prices(cells, PppOf(log_parity));
}

}  // namespace paritas::internal
