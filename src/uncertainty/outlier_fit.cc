// The screen's fit reuses FitCpd for every weighted solve, so the robust fit
// is no new solver; what it adds is what a screen needs and a parity does
// not: hat values (from the same block structure FitCpd exploits) and the
// cells that alone link part of a heading, whose residual says nothing.
#include "uncertainty/outlier_fit.h"

#include <Eigen/Cholesky>
#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

namespace paritas::internal {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
// 1 / Phi^-1(3/4): makes the median absolute deviation a consistent estimate
// of a normal standard deviation (Hampel 1974).
constexpr double kMadToSigma = 1.4826;
// Hat values closer to 1 than this carry no usable residual (rounding only);
// exact 1s are found on the graph.
constexpr double kHatOne = 1e-9;

double Median(std::vector<double> values) {
  const size_t mid = values.size() / 2;
  std::nth_element(values.begin(), values.begin() + mid, values.end());
  double median = values[mid];
  if (values.size() % 2 == 0) median = 0.5 * (median + *std::max_element(values.begin(), values.begin() + mid));
  return median;
}

// Cells grouped by one index (counting sort): cells of group g are
// order[start[g] .. start[g + 1]).
struct Groups {
  std::vector<int> start;
  std::vector<int> order;
};

Groups GroupBy(std::span<const int> index, int num_groups) {
  Groups groups;
  groups.start.assign(num_groups + 1, 0);
  for (int g : index) ++groups.start[g + 1];
  for (int g = 0; g < num_groups; ++g) groups.start[g + 1] += groups.start[g];
  groups.order.resize(index.size());
  std::vector<int> next(groups.start.begin(), groups.start.end() - 1);
  for (size_t k = 0; k < index.size(); ++k) groups.order[next[index[k]]++] = static_cast<int>(k);
  return groups;
}

// The regions and items present, renumbered 0.. in order.
struct Compressed {
  int num_regions = 0;
  int num_items = 0;
  std::vector<int> region;  // per cell
  std::vector<int> item;
  std::vector<int> region_of;  // compressed -> CpdData index
  std::vector<int> item_of;
};

Compressed Compress(const CpdData& data) {
  Compressed c;
  std::vector<int> region_index(data.num_regions, -1), item_index(data.num_items, -1);
  for (size_t k = 0; k < data.region.size(); ++k) {
    region_index[data.region[k]] = 0;
    item_index[data.item[k]] = 0;
  }
  for (int r = 0; r < data.num_regions; ++r) {
    if (region_index[r] < 0) continue;
    region_index[r] = static_cast<int>(c.region_of.size());
    c.region_of.push_back(r);
  }
  for (int i = 0; i < data.num_items; ++i) {
    if (item_index[i] < 0) continue;
    item_index[i] = static_cast<int>(c.item_of.size());
    c.item_of.push_back(i);
  }
  c.num_regions = static_cast<int>(c.region_of.size());
  c.num_items = static_cast<int>(c.item_of.size());
  for (size_t k = 0; k < data.region.size(); ++k) {
    c.region.push_back(region_index[data.region[k]]);
    c.item.push_back(item_index[data.item[k]]);
  }
  return c;
}

// Huber weight of each cell: min(1, c s / |e|) (Huber 1981).
Eigen::VectorXd HuberWeights(const Eigen::VectorXd& residual, double cutoff) {
  Eigen::VectorXd weight(residual.size());
  for (int64_t k = 0; k < residual.size(); ++k) {
    const double magnitude = std::abs(residual[k]);
    weight[k] = magnitude > cutoff ? cutoff / magnitude : 1.0;
  }
  return weight;
}

}  // namespace

double RobustScale(const Eigen::VectorXd& residual, const Eigen::VectorXd& hat,
                   const std::vector<CellLink>& link, int* num_cells) {
  std::vector<double> standardised;
  for (int64_t k = 0; k < residual.size(); ++k) {
    if (link[k] != CellLink::kNone || !(hat[k] < 1.0 - kHatOne)) continue;
    standardised.push_back(std::abs(residual[k]) / std::sqrt(1.0 - hat[k]));
  }
  *num_cells = static_cast<int>(standardised.size());
  if (*num_cells < kMinScaleCells) return kNaN;
  const double scale = kMadToSigma * Median(standardised);
  if (scale > 0.0) return scale;
  // More than half the cells fit exactly (identical prices, e.g. a national
  // tariff): the root mean square still measures the few that do not.
  double sum = 0.0;
  for (double v : standardised) sum += v * v;
  return std::sqrt(sum / *num_cells);
}

Eigen::VectorXd LeverageFactors(int num_regions, int num_items, std::span<const int> region,
                                std::span<const int> item, const Eigen::VectorXd& weight) {
  // Side A (the smaller) stays dense; side B is eliminated:
  // S = D_A - C D_B^-1 C', and for cell (a, b) with u = e_a - c_b / d_b,
  // q = 1 / d_b + u' S^+ u = 1 / d_b + G_aa - 2 (G C)_ab / d_b +
  // (C' G C)_bb / d_b^2. G = (S + 11'/m)^-1 equals S^+ on the vectors u (they
  // sum to 0; S + 11'/m is invertible on a linked design). Both products are
  // dense matrix products, like FitCpd's Schur complement.
  const bool regions_dense = num_regions <= num_items;
  const int m = regions_dense ? num_regions : num_items;
  const int num_b = regions_dense ? num_items : num_regions;
  const std::span<const int> a_of = regions_dense ? region : item;
  const std::span<const int> b_of = regions_dense ? item : region;
  Eigen::MatrixXd c = Eigen::MatrixXd::Zero(m, num_b);
  Eigen::VectorXd d_a = Eigen::VectorXd::Zero(m), d_b = Eigen::VectorXd::Zero(num_b);
  for (size_t k = 0; k < a_of.size(); ++k) {
    c(a_of[k], b_of[k]) += weight[k];
    d_a[a_of[k]] += weight[k];
    d_b[b_of[k]] += weight[k];
  }
  const Eigen::VectorXd inverse_d_b = d_b.cwiseInverse();
  Eigen::MatrixXd s = -(c * inverse_d_b.asDiagonal()) * c.transpose();
  s.diagonal() += d_a;
  s.array() += 1.0 / m;
  Eigen::VectorXd q = Eigen::VectorXd::Constant(static_cast<int64_t>(a_of.size()), kNaN);
  const Eigen::LLT<Eigen::MatrixXd> llt(s);
  if (llt.info() != Eigen::Success) return q;
  const Eigen::MatrixXd g = llt.solve(Eigen::MatrixXd::Identity(m, m));
  const Eigen::MatrixXd gc = g * c;
  const Eigen::VectorXd cgc = (c.array() * gc.array()).colwise().sum().transpose();
  for (size_t k = 0; k < a_of.size(); ++k) {
    const int a = a_of[k], b = b_of[k];
    q[k] = inverse_d_b[b] + g(a, a) - 2.0 * gc(a, b) * inverse_d_b[b] + cgc[b] * inverse_d_b[b] * inverse_d_b[b];
  }
  return q;
}

void FindCuttingCells(int num_regions, int num_items, std::span<const int> region,
                      std::span<const int> item, std::vector<CellLink>* link,
                      std::map<int, std::vector<int>>* region_side) {
  // Nodes: regions 0..R-1, then items R..R+I-1; each cell is an edge.
  const int num_nodes = num_regions + num_items;
  const int num_cells = static_cast<int>(region.size());
  std::vector<int> node_of_edge_end(2 * num_cells);
  for (int k = 0; k < num_cells; ++k) {
    node_of_edge_end[2 * k] = region[k];
    node_of_edge_end[2 * k + 1] = num_regions + item[k];
  }
  const Groups adjacency = GroupBy(node_of_edge_end, num_nodes);  // entries are edge ends 2k, 2k+1
  auto other = [&](int end) { return node_of_edge_end[end ^ 1]; };
  std::vector<int> tin(num_nodes, -1), low(num_nodes, 0), last(num_nodes, 0), parent_cell(num_nodes, -1);
  std::vector<int> next(num_nodes, 0), order, stack;
  for (int root = 0; root < num_nodes; ++root) {
    if (tin[root] >= 0) continue;
    tin[root] = low[root] = static_cast<int>(order.size());
    order.push_back(root);
    next[root] = adjacency.start[root];
    stack.push_back(root);
    while (!stack.empty()) {
      const int v = stack.back();
      if (next[v] < adjacency.start[v + 1]) {
        const int end = adjacency.order[next[v]++];
        if (end / 2 == parent_cell[v]) continue;
        const int u = other(end);
        if (tin[u] < 0) {
          parent_cell[u] = end / 2;
          tin[u] = low[u] = static_cast<int>(order.size());
          order.push_back(u);
          next[u] = adjacency.start[u];
          stack.push_back(u);
        } else {
          low[v] = std::min(low[v], tin[u]);
        }
        continue;
      }
      stack.pop_back();
      last[v] = static_cast<int>(order.size()) - 1;
      if (parent_cell[v] < 0) continue;
      const int cell = parent_cell[v];
      const int parent = v < num_regions ? num_regions + item[cell] : region[cell];
      low[parent] = std::min(low[parent], low[v]);
    }
  }
  // Regions among the first t nodes of the depth-first order: a subtree is a
  // contiguous range of it, so its regions are counted in O(1).
  std::vector<int> regions_before(num_nodes + 1, 0);
  for (int t = 0; t < num_nodes; ++t) regions_before[t + 1] = regions_before[t] + (order[t] < num_regions);
  std::vector<int> item_num_cells(num_items, 0);
  for (int k = 0; k < num_cells; ++k) ++item_num_cells[item[k]];
  link->assign(num_cells, CellLink::kNone);
  region_side->clear();
  for (int v = 0; v < num_nodes; ++v) {
    const int cell = parent_cell[v];
    if (cell < 0) continue;
    const int parent = v < num_regions ? num_regions + item[cell] : region[cell];
    if (low[v] <= tin[parent]) continue;  // another path links v's subtree
    if (item_num_cells[item[cell]] == 1) {
      (*link)[cell] = CellLink::kItemOnlyHere;
      continue;
    }
    (*link)[cell] = CellLink::kCutsHeading;
    // The subtree below the cut holds the region when v is the region,
    // otherwise the item's side.
    const bool below_is_region_side = v < num_regions;
    const int below = regions_before[last[v] + 1] - regions_before[tin[v]];
    const int side = below_is_region_side ? below : num_regions - below;
    if (side <= 1) continue;
    std::vector<int>& regions = (*region_side)[cell];
    for (int t = 0; t < num_nodes; ++t) {
      const bool in_subtree = t >= tin[v] && t <= last[v];
      if (order[t] < num_regions && in_subtree == below_is_region_side) regions.push_back(order[t]);
    }
    std::sort(regions.begin(), regions.end());
  }
}

ScreenFit FitScreen(const CpdData& data, const OutlierOptions& options) {
  ScreenFit fit;
  CpdOptions cpd;
  cpd.compute_standard_errors = false;
  CpdResult result = FitCpd(data, cpd);
  if (!result.identified) {
    fit.message = result.message;
    return fit;
  }
  const Compressed c = Compress(data);
  const int num_cells = static_cast<int>(data.region.size());
  FindCuttingCells(c.num_regions, c.num_items, c.region, c.item, &fit.link, &fit.region_side);
  for (auto& [cell, regions] : fit.region_side) {
    for (int& r : regions) r = c.region_of[r];
  }
  fit.item_num_cells.assign(data.num_items, 0);
  for (int k = 0; k < num_cells; ++k) ++fit.item_num_cells[data.item[k]];
  fit.weight = Eigen::VectorXd::Ones(num_cells);
  fit.leverage = LeverageFactors(c.num_regions, c.num_items, c.region, c.item, fit.weight);
  fit.converged = options.fit == OutlierFit::kLeastSquares;
  std::vector<double> weight(num_cells, 1.0);
  CpdData weighted = data;
  while (!fit.converged && fit.num_iterations < options.max_iterations) {
    // The scale is re-estimated from the current residuals at every step,
    // so it is not fixed by a least-squares fit that the errors dragged.
    const double scale = RobustScale(result.residual, fit.weight.cwiseProduct(fit.leverage), fit.link,
                                     &fit.num_scale_cells);
    if (!(scale > 0.0)) break;  // too few cells, or an exact fit: least squares it is
    const Eigen::VectorXd next = HuberWeights(result.residual, options.huber_constant * scale);
    const double change = (next - fit.weight).cwiseAbs().maxCoeff();
    if (change <= options.weight_tolerance) {
      fit.converged = true;
      break;
    }
    for (int k = 0; k < num_cells; ++k) weight[k] = next[k];
    weighted.weight = weight;
    CpdResult refit = FitCpd(weighted, cpd);
    if (!refit.identified) break;  // cannot happen with positive weights; keep the last fit
    fit.weight = next;
    fit.leverage = LeverageFactors(c.num_regions, c.num_items, c.region, c.item, fit.weight);
    result = std::move(refit);
    ++fit.num_iterations;
  }
  if (!fit.converged && fit.num_iterations == 0) fit.converged = true;  // nothing to reweight
  fit.identified = true;
  fit.degrees_of_freedom = result.degrees_of_freedom;
  fit.log_parity = result.log_parity;
  fit.item_effect = result.item_effect;
  fit.residual = result.residual;
  fit.scale = RobustScale(fit.residual, fit.weight.cwiseProduct(fit.leverage), fit.link, &fit.num_scale_cells);
  return fit;
}

}  // namespace paritas::internal
