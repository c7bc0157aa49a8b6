// GEKS as least squares on the comparison graph. One pass over the pairs
// antisymmetrises the bilaterals into a dense matrix D with a presence mask
// and finds the linked groups; the closed form and the graph Laplacian
// normal equations are then column sums and one Cholesky per group.
#include "paritas/aggregation/geks.h"

#include <Eigen/Cholesky>
#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>
#include <numeric>
#include <utility>
#include <vector>

#include "base/not_a_number.h"

namespace paritas {
namespace {

// Side of the square tiles in which the pairs are walked.
constexpr int kTile = 64;

// Union-find with path halving; union by smaller root index keeps the
// representative deterministic.
class DisjointSets {
 public:
  explicit DisjointSets(int n) : parent_(n) { std::iota(parent_.begin(), parent_.end(), 0); }
  int Find(int x) {
    while (parent_[x] != x) {
      parent_[x] = parent_[parent_[x]];
      x = parent_[x];
    }
    return x;
  }
  void Union(int a, int b) {
    a = Find(a);
    b = Find(b);
    if (a == b) return;
    if (a < b) std::swap(a, b);
    parent_[a] = b;
  }

 private:
  std::vector<int> parent_;
};

// Sorts groups largest first, ties by smallest first member (members are
// already ascending).
void SortGroups(std::vector<std::vector<int>>* groups) {
  std::stable_sort(groups->begin(), groups->end(),
                   [](const std::vector<int>& x, const std::vector<int>& y) {
                     if (x.size() != y.size()) return x.size() > y.size();
                     return x.front() < y.front();
                   });
}

}  // namespace

GeksResult Geks(const Eigen::MatrixXd& log_bilateral) {
  assert(log_bilateral.rows() == log_bilateral.cols());
  const int n = static_cast<int>(log_bilateral.rows());
  GeksResult result;
  result.log_parity = Eigen::VectorXd::Constant(n, kNaN);

  // One pass over the upper triangle builds D(a, b), the target for
  // ln P_b - ln P_a (antisymmetric, 0 where absent; both directions present:
  // ½(l_ab - l_ba); one present: that one, signed), the symmetric 0/1 pair
  // mask, participation and the linked groups. Two n x n matrices in all:
  // at n = 1,000 each fresh temporary costs as much as the arithmetic.
  Eigen::MatrixXd d = Eigen::MatrixXd::Zero(n, n);
  Eigen::MatrixXd pair = Eigen::MatrixXd::Zero(n, n);
  std::vector<char> takes_part(n, 0);
  DisjointSets sets(n);
  long long num_pairs = 0;
  for (int b = 0; b < n; ++b) {
    if (std::isfinite(log_bilateral(b, b))) takes_part[b] = 1;
  }
  // Tiles keep the transposed reads (b, a) in cache.
  for (int b0 = 0; b0 < n; b0 += kTile) {
    for (int a0 = 0; a0 <= b0; a0 += kTile) {
      for (int b = b0; b < std::min(n, b0 + kTile); ++b) {
        for (int a = a0; a < std::min(b, a0 + kTile); ++a) {
          const double ab = log_bilateral(a, b);
          const double ba = log_bilateral(b, a);
          const bool has_ab = std::isfinite(ab);
          const bool has_ba = std::isfinite(ba);
          if (!has_ab && !has_ba) continue;
          const double value = has_ab && has_ba ? 0.5 * (ab - ba) : (has_ab ? ab : -ba);
          d(a, b) = value;
          d(b, a) = -value;
          pair(a, b) = pair(b, a) = 1.0;
          takes_part[a] = takes_part[b] = 1;
          sets.Union(a, b);
          ++num_pairs;
        }
      }
    }
  }
  std::vector<std::vector<int>> by_root(n);
  for (int r = 0; r < n; ++r) {
    if (takes_part[r]) by_root[sets.Find(r)].push_back(r);
  }
  for (auto& g : by_root) {
    if (!g.empty()) result.groups.push_back(std::move(g));
  }
  SortGroups(&result.groups);
  result.identified = result.groups.size() == 1;

  const long long num_participants =
      std::count(takes_part.begin(), takes_part.end(), static_cast<char>(1));
  result.complete = result.identified && num_pairs == num_participants * (num_participants - 1) / 2;

  if (result.complete) {
    // Closed form: with every pair present the normal equations reduce to
    // n x_b - sum_a x_a = sum_a D(a, b), and sum_a x_a = 0.
    const std::vector<int>& g = result.groups.front();
    const int m = static_cast<int>(g.size());
    Eigen::VectorXd x = d(g, g).colwise().sum().transpose() / m;
    x.array() -= x.mean();  // zero in exact arithmetic; removes rounding drift
    for (int j = 0; j < m; ++j) result.log_parity[g[j]] = x[j];
  } else {
    // Graph Laplacian normal equations per group: deg_b x_b - sum_{a~b} x_a
    // = sum_{a~b} D(a, b). The first member is held at 0, which makes the
    // reduced Laplacian of a connected group positive definite.
    for (const std::vector<int>& g : result.groups) {
      const int m = static_cast<int>(g.size());
      Eigen::VectorXd x = Eigen::VectorXd::Zero(m);
      if (m > 1) {
        const std::vector<int> rest(g.begin() + 1, g.end());
        Eigen::MatrixXd laplacian = -pair(rest, rest);
        laplacian.diagonal() = pair(g, rest).colwise().sum().transpose();
        const Eigen::VectorXd rhs = d(g, rest).colwise().sum().transpose();
        x.tail(m - 1) = laplacian.llt().solve(rhs);
        x.array() -= x.mean();
      }
      for (int j = 0; j < m; ++j) result.log_parity[g[j]] = x[j];
    }
  }

  // Residuals over the available pairs.
  if (num_pairs > 0) {
    double sum_sq = 0.0;
    for (int b = 0; b < n; ++b) {
      for (int a = 0; a < b; ++a) {
        if (pair(a, b) == 0.0) continue;
        const double e = d(a, b) - (result.log_parity[b] - result.log_parity[a]);
        sum_sq += e * e;
      }
    }
    result.rms_log_residual = std::sqrt(sum_sq / static_cast<double>(num_pairs));
  }
  return result;
}

}  // namespace paritas
