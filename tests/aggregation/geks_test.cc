// GEKS checked against published theorems (reference README, section 2) and
// against a direct dense least-squares solve; the six-commodity data of the
// CPI Manual (2004, ch. 19) supply a real bilateral Fisher matrix.
#include "paritas/aggregation/geks.h"

#include <gtest/gtest.h>

#include <Eigen/Dense>
#include <cmath>
#include <fstream>
#include <limits>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "test_util.h"

namespace paritas {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// Prices and quantities of the five situations (rows) and six commodities.
struct SixCommodity {
  Eigen::MatrixXd price = Eigen::MatrixXd::Zero(5, 6);
  Eigen::MatrixXd quantity = Eigen::MatrixXd::Zero(5, 6);
};

SixCommodity ReadSixCommodity() {
  SixCommodity data;
  std::ifstream in(testing::TestDataPath("published/six_commodity_prices_quantities.csv"));
  std::string line;
  std::getline(in, line);  // header
  while (std::getline(in, line)) {
    std::stringstream fields(line);
    std::string situation, commodity, price, quantity;
    std::getline(fields, situation, ',');
    std::getline(fields, commodity, ',');
    std::getline(fields, price, ',');
    std::getline(fields, quantity, ',');
    const int r = std::stoi(situation) - 1;
    const int c = std::stoi(commodity.substr(1)) - 1;
    data.price(r, c) = std::stod(price);
    data.quantity(r, c) = std::stod(quantity);
  }
  return data;
}

// ln Fisher(a -> b) for every pair, straight from the textbook formulas.
Eigen::MatrixXd LogFisherMatrix(const SixCommodity& d) {
  const int n = static_cast<int>(d.price.rows());
  Eigen::MatrixXd out(n, n);
  for (int a = 0; a < n; ++a) {
    for (int b = 0; b < n; ++b) {
      const double laspeyres =
          d.price.row(b).dot(d.quantity.row(a)) / d.price.row(a).dot(d.quantity.row(a));
      const double paasche =
          d.price.row(b).dot(d.quantity.row(b)) / d.price.row(a).dot(d.quantity.row(b));
      out(a, b) = 0.5 * (std::log(laspeyres) + std::log(paasche));
    }
  }
  return out;
}

// A transitive set perturbed by noise, with entries removed at random (NaN)
// but every region kept linked through a chain a -> a+1.
Eigen::MatrixXd NoisyBilaterals(int n, double coverage, uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  std::normal_distribution<double> normal(0.0, 1.0);
  Eigen::VectorXd x(n);
  for (int r = 0; r < n; ++r) x[r] = 0.2 * normal(rng);
  Eigen::MatrixXd m = Eigen::MatrixXd::Constant(n, n, kNaN);
  for (int a = 0; a < n; ++a) {
    for (int b = 0; b < n; ++b) {
      if (a == b) {
        m(a, b) = 0.0;
      } else if (b == a + 1 || uniform(rng) < coverage) {
        m(a, b) = x[b] - x[a] + 0.05 * normal(rng);
      }
    }
  }
  return m;
}

// Minimises sum over available pairs of (x_b - x_a - d_ab)^2 with a dense
// QR solve on the pair incidence matrix (region 0 held at 0), then centres.
Eigen::VectorXd DenseLeastSquares(const Eigen::MatrixXd& m) {
  const int n = static_cast<int>(m.rows());
  std::vector<Eigen::RowVectorXd> rows;
  std::vector<double> rhs;
  for (int a = 0; a < n; ++a) {
    for (int b = a + 1; b < n; ++b) {
      const bool ab = std::isfinite(m(a, b));
      const bool ba = std::isfinite(m(b, a));
      if (!ab && !ba) continue;
      const double d = ab && ba ? 0.5 * (m(a, b) - m(b, a)) : (ab ? m(a, b) : -m(b, a));
      Eigen::RowVectorXd row = Eigen::RowVectorXd::Zero(n);
      row[b] += 1.0;
      row[a] -= 1.0;
      rows.push_back(row);
      rhs.push_back(d);
    }
  }
  Eigen::MatrixXd design(rows.size(), n - 1);
  Eigen::VectorXd y(rows.size());
  for (size_t k = 0; k < rows.size(); ++k) {
    design.row(k) = rows[k].tail(n - 1);
    y[k] = rhs[k];
  }
  Eigen::VectorXd x = Eigen::VectorXd::Zero(n);
  x.tail(n - 1) = design.colPivHouseholderQr().solve(y);
  x.array() -= x.mean();
  return x;
}

TEST(Geks, TwoRegionsGiveTheirBilateralFisherIndex) {
  // GEKS definition (Gini 1931; Eltetö and Köves 1964; Szulc 1964); the
  // Fisher index of situation 3 on situation 1 is 1.272099 (CPI Manual 2004,
  // table 19.2, exact to 6 decimals).
  const Eigen::MatrixXd fisher = LogFisherMatrix(ReadSixCommodity());
  Eigen::MatrixXd pair(2, 2);
  pair << fisher(0, 0), fisher(0, 2), fisher(2, 0), fisher(2, 2);
  const GeksResult result = Geks(pair);
  ASSERT_TRUE(result.identified);
  EXPECT_TRUE(result.complete);
  PARITAS_EXPECT_CLOSE(std::exp(result.log_parity[1] - result.log_parity[0]), 1.272099, 1e-6);
  PARITAS_EXPECT_CLOSE(result.log_parity[0] + result.log_parity[1], 0.0, 1e-15);
}

TEST(Geks, LeavesATransitiveSetUnchanged) {
  // Diewert (1999): transitive bilaterals are their own GEKS; holds with gaps.
  const Eigen::Vector4d x(0.1, -0.3, 0.25, -0.05);
  for (bool with_gaps : {false, true}) {
    Eigen::MatrixXd m = Eigen::VectorXd::Ones(4) * x.transpose() - x * Eigen::RowVectorXd::Ones(4);
    if (with_gaps) m(0, 2) = m(2, 0) = m(1, 3) = m(3, 1) = kNaN;
    const GeksResult result = Geks(m);
    EXPECT_EQ(result.complete, !with_gaps);
    EXPECT_TRUE(result.identified);
    for (int r = 0; r < 4; ++r) PARITAS_EXPECT_CLOSE(result.log_parity[r], x[r] - x.mean(), 1e-14);
    EXPECT_LT(result.rms_log_residual, 1e-14);
  }
}

TEST(Geks, RatiosDoNotDependOnTheBaseRegion) {
  // Diewert (1999): GEKS with base k, ln P_b/P_k = (1/n) sum_a (ln F_ab - ln F_ak),
  // gives the same ratios for every k, and they equal ours.
  const Eigen::MatrixXd fisher = LogFisherMatrix(ReadSixCommodity());
  const GeksResult result = Geks(fisher);
  ASSERT_TRUE(result.complete);
  for (int k = 0; k < 5; ++k) {
    for (int b = 0; b < 5; ++b) {
      const double based = (fisher.col(b) - fisher.col(k)).mean();
      PARITAS_EXPECT_CLOSE(based, result.log_parity[b] - result.log_parity[k], 1e-14);
    }
  }
}

TEST(Geks, IncompleteSolveIsTheClosestTransitiveSetInLeastSquares) {
  // Diewert (1999): GEKS = least-squares projection onto transitive sets;
  // checked against a dense QR solve, with the Laplacian's fixed region moved
  // by permuting the regions.
  const int n = 40;
  const Eigen::MatrixXd m = NoisyBilaterals(n, 0.3, 7);
  const GeksResult result = Geks(m);
  ASSERT_TRUE(result.identified);
  EXPECT_FALSE(result.complete);
  const Eigen::VectorXd dense = DenseLeastSquares(m);
  for (int r = 0; r < n; ++r) PARITAS_EXPECT_CLOSE(result.log_parity[r], dense[r], 1e-12);

  Eigen::VectorXi order(n);
  for (int r = 0; r < n; ++r) order[r] = (r * 7 + 3) % n;  // a permutation (gcd(7, 40) = 1)
  Eigen::MatrixXd permuted(n, n);
  for (int a = 0; a < n; ++a) {
    for (int b = 0; b < n; ++b) permuted(a, b) = m(order[a], order[b]);
  }
  const GeksResult moved = Geks(permuted);
  for (int r = 0; r < n; ++r) {
    PARITAS_EXPECT_CLOSE(moved.log_parity[r], result.log_parity[order[r]], 1e-12);
  }
  // The residual reported is that of the least-squares fit.
  double sum_sq = 0.0;
  int num_pairs = 0;
  for (int a = 0; a < n; ++a) {
    for (int b = a + 1; b < n; ++b) {
      const bool ab = std::isfinite(m(a, b));
      const bool ba = std::isfinite(m(b, a));
      if (!ab && !ba) continue;
      const double d = ab && ba ? 0.5 * (m(a, b) - m(b, a)) : (ab ? m(a, b) : -m(b, a));
      sum_sq += std::pow(d - dense[b] + dense[a], 2);
      ++num_pairs;
    }
  }
  PARITAS_EXPECT_CLOSE(result.rms_log_residual, std::sqrt(sum_sq / num_pairs), 1e-12);
}

TEST(Geks, LaplacianSolveEqualsTheClassicFormulaWhenEveryPairIsPresent) {
  // A sixth region that takes part only through its diagonal makes the fit
  // unidentified, which sends the five linked regions through the Laplacian
  // path; they must still get the classic closed form.
  const Eigen::MatrixXd fisher = LogFisherMatrix(ReadSixCommodity());
  Eigen::MatrixXd m = Eigen::MatrixXd::Constant(6, 6, kNaN);
  m.topLeftCorner(5, 5) = fisher;
  m(5, 5) = 0.0;
  const GeksResult result = Geks(m);
  EXPECT_FALSE(result.identified);
  EXPECT_FALSE(result.complete);
  ASSERT_EQ(result.groups.size(), 2u);
  EXPECT_EQ(result.groups[1], std::vector<int>{5});
  for (int b = 0; b < 5; ++b) {
    PARITAS_EXPECT_CLOSE(result.log_parity[b], fisher.col(b).mean() - fisher.mean(), 1e-14);
  }
  EXPECT_EQ(result.log_parity[5], 0.0);
}

TEST(Geks, AveragesBothDirectionsAndAcceptsOneDirection) {
  // Pair value ½(l_ab - l_ba): inconsistent directions are split evenly.
  Eigen::Matrix2d both;
  both << 0.0, 0.3, -0.1, 0.0;
  const GeksResult averaged = Geks(both);
  PARITAS_EXPECT_CLOSE(averaged.log_parity[1] - averaged.log_parity[0], 0.2, 1e-15);
  PARITAS_EXPECT_CLOSE(averaged.rms_log_residual, 0.0, 1e-15);

  // Upper triangle alone carries the same information as the full matrix.
  const Eigen::MatrixXd full = NoisyBilaterals(12, 1.0, 3);
  Eigen::MatrixXd antisymmetric = 0.5 * (full - full.transpose());
  Eigen::MatrixXd upper = antisymmetric;
  for (int a = 0; a < 12; ++a) {
    for (int b = 0; b < a; ++b) upper(a, b) = kNaN;
  }
  const GeksResult from_full = Geks(full);
  const GeksResult from_upper = Geks(upper);
  ASSERT_TRUE(from_upper.complete);
  for (int r = 0; r < 12; ++r) {
    PARITAS_EXPECT_CLOSE(from_upper.log_parity[r], from_full.log_parity[r], 1e-14);
  }
}

TEST(Geks, ReportsUnlinkedGroupsEachCentredAndLeavesAbsentRegionsOut) {
  // Regions {0, 2} and {1, 3, 4} never meet; region 5 has no entry at all.
  Eigen::MatrixXd m = Eigen::MatrixXd::Constant(6, 6, kNaN);
  m(0, 2) = 0.4;
  m(1, 3) = 0.1;
  m(3, 4) = 0.2;
  const GeksResult result = Geks(m);
  EXPECT_FALSE(result.identified);
  EXPECT_FALSE(result.complete);
  ASSERT_EQ(result.groups.size(), 2u);
  EXPECT_EQ(result.groups[0], (std::vector<int>{1, 3, 4}));
  EXPECT_EQ(result.groups[1], (std::vector<int>{0, 2}));
  PARITAS_EXPECT_CLOSE(result.log_parity[0], -0.2, 1e-15);
  PARITAS_EXPECT_CLOSE(result.log_parity[2], 0.2, 1e-15);
  PARITAS_EXPECT_CLOSE(result.log_parity[1] + result.log_parity[3] + result.log_parity[4], 0.0,
                       1e-15);
  PARITAS_EXPECT_CLOSE(result.log_parity[4] - result.log_parity[1], 0.3, 1e-15);
  EXPECT_TRUE(std::isnan(result.log_parity[5]));
}

TEST(Geks, HandlesEmptyAndSingleRegionMatrices) {
  const GeksResult empty = Geks(Eigen::MatrixXd(0, 0));
  EXPECT_FALSE(empty.identified);
  EXPECT_TRUE(empty.groups.empty());
  const GeksResult single = Geks(Eigen::MatrixXd::Zero(1, 1));
  EXPECT_TRUE(single.identified);
  EXPECT_TRUE(single.complete);
  EXPECT_EQ(single.log_parity[0], 0.0);
}

}  // namespace
}  // namespace paritas
