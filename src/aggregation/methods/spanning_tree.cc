// spanning-tree: bilateral Fisher indices chained along the minimum spanning
// tree of the Paasche-Laspeyres spread (Hill 1999). Prim's algorithm on the
// dense all-pairs matrix is O(R^2) with no edge list, which suits the
// complete graphs a node's bilaterals usually form. Edges are ordered by
// (spread, smaller region, larger region), a strict total order, so the tree
// is the unique minimum of that order whatever the start region.
#include <algorithm>
#include <cmath>
#include <limits>
#include <tuple>
#include <vector>

#include "paritas/aggregation/aggregation.h"

#include "base/not_a_number.h"

namespace paritas {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

// An edge's place in the strict total order the tree minimises.
std::tuple<double, int, int> EdgeKey(double spread, int a, int b) {
  return {spread, std::min(a, b), std::max(a, b)};
}

// Grows the tree of the group containing `root` (Prim); appends its members
// in the order they join and its edges, parent first.
void GrowTree(const Eigen::MatrixXd& spread, const std::vector<char>& takes_part, int root,
              std::vector<char>* in_tree, std::vector<int>* members, std::vector<TreeEdge>* edges) {
  const int n = static_cast<int>(spread.rows());
  std::vector<double> best(n, kInf);
  std::vector<int> parent(n, -1);
  int next = root;
  while (next >= 0) {
    const int v = next;
    (*in_tree)[v] = 1;
    members->push_back(v);
    if (parent[v] >= 0) edges->push_back({parent[v], v, best[v], kNaN});
    next = -1;
    for (int u = 0; u < n; ++u) {
      if ((*in_tree)[u] || !takes_part[u]) continue;
      const double s = spread(u, v);  // symmetric; column reads
      if (std::isfinite(s) &&
          (parent[u] < 0 || EdgeKey(s, v, u) < EdgeKey(best[u], parent[u], u))) {
        best[u] = s;
        parent[u] = v;
      }
      if (parent[u] >= 0 &&
          (next < 0 || EdgeKey(best[u], parent[u], u) < EdgeKey(best[next], parent[next], next))) {
        next = u;
      }
    }
  }
}

}  // namespace

AggregateParities SpanningTree(const BilateralMatrices& bilaterals) {
  const int n = static_cast<int>(bilaterals.fisher.rows());
  // |ln(L/P)| is symmetric: L(b,a) / P(b,a) = (1/P(a,b)) / (1/L(a,b)).
  const Eigen::MatrixXd spread =
      (bilaterals.laspeyres.array() / bilaterals.paasche.array()).log().abs().matrix();
  std::vector<char> takes_part(n, 0), in_tree(n, 0);
  for (int r = 0; r < n; ++r) takes_part[r] = std::isfinite(bilaterals.fisher(r, r)) ? 1 : 0;

  AggregateParities out;
  out.log_parity = Eigen::VectorXd::Constant(n, kNaN);
  for (int root = 0; root < n; ++root) {
    if (!takes_part[root] || in_tree[root]) continue;
    std::vector<int> members;
    const size_t first_edge = out.tree.size();
    GrowTree(spread, takes_part, root, &in_tree, &members, &out.tree);
    // Members join after their parent, so one pass chains the Fisher links.
    out.log_parity(root) = 0.0;
    for (size_t k = first_edge; k < out.tree.size(); ++k) {
      TreeEdge& edge = out.tree[k];
      edge.fisher = bilaterals.fisher(edge.from, edge.to);
      out.log_parity(edge.to) = out.log_parity(edge.from) + std::log(edge.fisher);
    }
    double mean = 0.0;
    for (int r : members) mean += out.log_parity(r);
    mean /= static_cast<double>(members.size());
    for (int r : members) out.log_parity(r) -= mean;
    std::sort(members.begin(), members.end());
    out.groups.push_back(std::move(members));
  }
  std::stable_sort(out.groups.begin(), out.groups.end(),
                   [](const std::vector<int>& x, const std::vector<int>& y) {
                     if (x.size() != y.size()) return x.size() > y.size();
                     return x.front() < y.front();
                   });
  out.identified = out.groups.size() == 1;
  out.complete = out.identified && spread.array().isFinite().count() ==
                                       static_cast<Eigen::Index>(out.groups.front().size()) *
                                           static_cast<Eigen::Index>(out.groups.front().size());
  return out;
}

namespace internal {
namespace {

class SpanningTreeMethod final : public AggregationMethod {
 public:
  std::string_view Name() const override { return "spanning-tree"; }
  std::string_view Description() const override {
    return "Fisher indices chained along the minimum spanning tree of the Paasche-Laspeyres spread";
  }
  std::string_view ReportTitle() const override {
    return "Minimum spanning tree of Fisher indices";
  }
  std::string_view ReportHtml() const override {
    return "Regions are linked by the tree that joins them all with the smallest total "
           "Paasche&ndash;Laspeyres spread |ln(L/P)| (pairs with similar price and quantity "
           "structures first), and parities are the bilateral Fisher indices multiplied along the "
           "tree's paths. Ties in the spread are broken by region order. Hill, R.J. (1999), "
           "\"Comparing price levels across countries using minimum-spanning trees\", <i>Review of "
           "Economics and Statistics</i> 81(1).";
  }
  AggregationProperties Properties() const override { return {}; }
  BilateralOptions BilateralsNeeded() const override {
    BilateralOptions needed;
    needed.tornqvist = needed.num_matched = false;
    return needed;
  }
  AggregateParities Aggregate(const NodeArrays&,
                              const BilateralMatrices& bilaterals) const override {
    return SpanningTree(bilaterals);
  }
};

}  // namespace

const AggregationMethod& SpanningTreeAggregationMethod() {
  static const SpanningTreeMethod method;
  return method;
}

}  // namespace internal
}  // namespace paritas
