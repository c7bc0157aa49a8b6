// The weighted-cpd and spanning-tree aggregation methods checked against
// published cases and theorems (reference README) and against properties
// every multilateral method must have. The six-commodity data of the CPI
// Manual (2004, ch. 19, tables 19.1-19.2) are read as five regions with one
// item per heading, so a heading parity is the commodity's price.
#include <gtest/gtest.h>

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <fstream>
#include <limits>
#include <numeric>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "paritas/aggregation/aggregation.h"
#include "test_util.h"

namespace paritas {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

NodeArrays ReadSixCommodity() {
  NodeArrays arrays{Eigen::MatrixXd::Zero(5, 6), Eigen::MatrixXd::Zero(5, 6)};
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
    const int r = std::stoi(situation) - 1, h = std::stoi(commodity.substr(1)) - 1;
    arrays.price(r, h) = std::stod(price);
    arrays.expenditure(r, h) = std::stod(price) * std::stod(quantity);
  }
  return arrays;
}

// Random heading parities and expenditure with gaps (NaN), every region
// keeping heading 0 so that all stay linked. Computed here.
NodeArrays RandomNode(int num_regions, int num_headings, double coverage, uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  std::lognormal_distribution<double> lognormal(0.0, 0.4);
  NodeArrays arrays{Eigen::MatrixXd(num_regions, num_headings),
                    Eigen::MatrixXd(num_regions, num_headings)};
  for (int r = 0; r < num_regions; ++r) {
    for (int h = 0; h < num_headings; ++h) {
      const bool present = h == 0 || uniform(rng) < coverage;
      arrays.price(r, h) = present ? lognormal(rng) : kNaN;
      arrays.expenditure(r, h) = present ? 100.0 * lognormal(rng) : kNaN;
    }
  }
  return arrays;
}

AggregateParities RunMethod(const std::string& name, const NodeArrays& arrays) {
  const AggregationMethod* method = FindAggregationMethod(name);
  EXPECT_NE(method, nullptr) << name;
  return AggregateFromBilaterals(arrays, NodeBilaterals(arrays, method->BilateralsNeeded()),
                                 *method);
}

TEST(AggregationMethods, EveryMethodRunsOnTheSixCommodityData) {
  // CPI Manual (2004), tables 19.1-19.2, read as five regions.
  const NodeArrays arrays = ReadSixCommodity();
  for (const std::string& name : AggregationMethodNames()) {
    const AggregateParities result = RunMethod(name, arrays);
    EXPECT_TRUE(result.identified) << name;
    ASSERT_EQ(result.log_parity.size(), 5) << name;
    EXPECT_TRUE(result.log_parity.allFinite()) << name;
    EXPECT_NEAR(result.log_parity.sum(), 0.0, 1e-14) << name;
  }
}

TEST(SpanningTree, LinksTheSixCommoditySituationsInOrderAndChainsTheirFisherIndices) {
  // Adjacent situations have the smallest Paasche-Laspeyres spreads, so the
  // tree is the path 1-2-3-4-5 and the parities are the chained Fisher
  // indices: 1.401050, 1.318509, 1.268915, 1.222610, computed from the data
  // of CPI Manual (2004) tables 19.1-19.2 (reference README, section 1; the
  // manual prints chained indices in chapter 19, to 4 decimals).
  const AggregateParities result = RunMethod("spanning-tree", ReadSixCommodity());
  ASSERT_TRUE(result.identified);
  ASSERT_EQ(result.tree.size(), 4u);
  for (int k = 0; k < 4; ++k) {
    EXPECT_EQ(result.tree[k].from, k);
    EXPECT_EQ(result.tree[k].to, k + 1);
  }
  const double chained[] = {1.0, 1.401050, 1.318509, 1.268915, 1.222610};
  for (int r = 0; r < 5; ++r) {
    EXPECT_NEAR(std::exp(result.log_parity[r] - result.log_parity[0]), chained[r], 1e-6) << r;
  }
  // The first link is the Fisher index of situation 2 on 1, 1.401050
  // (six_commodity_indices.csv, computed from tables 19.1-19.2), and its
  // spread |ln(1.42 / 1.382353)| = 0.026870 (computed here).
  EXPECT_NEAR(result.tree[0].fisher, 1.401050, 1e-6);
  EXPECT_NEAR(result.tree[0].spread, 0.026870, 1e-6);
}

TEST(WeightedCpd, SatisfiesTheRaoSystemWithOwnShares) {
  // Rao (2005): at the solution ln PPP_r = sum_h s_rh (ln p_rh - ln pi_h)
  // with ln pi_h = sum_r s_rh (ln p_rh - ln PPP_r) / sum_r s_rh; the
  // normal equations of the weighted regression, so they hold with gaps.
  for (const double coverage : {1.0, 0.7}) {
    const NodeArrays arrays = RandomNode(9, 7, coverage, 5);
    const Eigen::MatrixXd share = OwnExpenditureShares(arrays);
    const AggregateParities result = WeightedCpd(arrays, share);
    ASSERT_TRUE(result.identified);
    const Eigen::MatrixXd log_p = arrays.price.array().log().matrix();
    Eigen::VectorXd log_pi = Eigen::VectorXd::Zero(7);
    for (int h = 0; h < 7; ++h) {
      double sum = 0.0, weight = 0.0;
      for (int r = 0; r < 9; ++r) {
        if (!std::isfinite(share(r, h))) continue;
        sum += share(r, h) * (log_p(r, h) - result.log_parity[r]);
        weight += share(r, h);
      }
      log_pi[h] = sum / weight;
    }
    for (int r = 0; r < 9; ++r) {
      double rao = 0.0;
      for (int h = 0; h < 7; ++h) {
        if (std::isfinite(share(r, h))) rao += share(r, h) * (log_p(r, h) - log_pi[h]);
      }
      EXPECT_NEAR(result.log_parity[r], rao, 1e-12) << "coverage " << coverage << " region " << r;
    }
  }
}

TEST(WeightedCpd, TwoRegionsWeightedByMeanSharesGiveTheTornqvistIndex) {
  // Diewert (2005): each heading weighted by the mean of the two regions'
  // shares gives the Törnqvist index; 1.405162 (situation 2 on 1) and
  // 1.247661 (5 on 1) from six_commodity_indices.csv, computed from the
  // data of CPI Manual (2004) tables 19.1-19.2.
  const NodeArrays six = ReadSixCommodity();
  for (const auto& [other, tornqvist] : {std::pair{1, 1.405162}, std::pair{4, 1.247661}}) {
    NodeArrays pair{six.price(std::vector<int>{0, other}, Eigen::all),
                    six.expenditure(std::vector<int>{0, other}, Eigen::all)};
    const Eigen::MatrixXd share = OwnExpenditureShares(pair);
    const Eigen::RowVectorXd mean = share.colwise().mean();
    const AggregateParities result = WeightedCpd(pair, mean.replicate(2, 1));
    ASSERT_TRUE(result.identified);
    const double index = std::exp(result.log_parity[1] - result.log_parity[0]);
    EXPECT_NEAR(index, tornqvist, 1e-6);
    EXPECT_NEAR(index, NodeBilaterals(pair).tornqvist(0, 1), 1e-13);
  }
}

class MethodProperties : public ::testing::TestWithParam<std::string> {};

TEST_P(MethodProperties, PermutingRegionsPermutesTheParities) {
  // Symmetric treatment of regions: no region is special, including the one
  // a tree is grown from (base invariance). Random data have no ties.
  const NodeArrays arrays = RandomNode(12, 8, 0.75, 17);
  const AggregateParities base = RunMethod(GetParam(), arrays);
  ASSERT_TRUE(base.identified);
  std::vector<int> order(12);
  std::iota(order.begin(), order.end(), 0);
  std::mt19937_64 rng(3);
  for (int trial = 0; trial < 4; ++trial) {
    std::shuffle(order.begin(), order.end(), rng);
    const NodeArrays permuted{arrays.price(order, Eigen::all),
                              arrays.expenditure(order, Eigen::all)};
    const AggregateParities result = RunMethod(GetParam(), permuted);
    ASSERT_TRUE(result.identified);
    for (int k = 0; k < 12; ++k)
      EXPECT_NEAR(result.log_parity[k], base.log_parity[order[k]], 1e-12);
  }
}

TEST_P(MethodProperties, ParityRatiosAreTransitiveAndIndependentOfTheBase) {
  // Transitivity: P_ac = P_ab P_bc for the matrix of parity ratios; base
  // invariance: rebasing on any region leaves the ratios unchanged.
  const AggregateParities result = RunMethod(GetParam(), RandomNode(6, 5, 0.8, 23));
  const Eigen::VectorXd& x = result.log_parity;
  for (int a = 0; a < 6; ++a) {
    for (int b = 0; b < 6; ++b) {
      for (int c = 0; c < 6; ++c)
        EXPECT_NEAR((x[c] - x[a]) - ((x[b] - x[a]) + (x[c] - x[b])), 0.0, 1e-14);
    }
  }
  for (int base = 0; base < 6; ++base) {
    const Eigen::VectorXd rebased = x.array() - x[base];
    for (int r = 0; r < 6; ++r) EXPECT_NEAR(rebased[r] - rebased[0], x[r] - x[0], 1e-14);
  }
}

TEST_P(MethodProperties, UnlinkedRegionsGiveGroupsAndNoIdentification) {
  // Regions 0-2 price headings 0-1 only, regions 3-4 headings 2-3 only.
  NodeArrays arrays = RandomNode(5, 4, 1.0, 29);
  for (int r = 0; r < 5; ++r) {
    for (int h = 0; h < 4; ++h) {
      if ((r < 3) != (h < 2)) arrays.price(r, h) = arrays.expenditure(r, h) = kNaN;
    }
  }
  const AggregateParities result = RunMethod(GetParam(), arrays);
  EXPECT_FALSE(result.identified);
  ASSERT_EQ(result.groups.size(), 2u);
  EXPECT_EQ(result.groups[0], (std::vector<int>{0, 1, 2}));
  EXPECT_EQ(result.groups[1], (std::vector<int>{3, 4}));
  EXPECT_NEAR(result.log_parity.head(3).sum(), 0.0, 1e-14);  // each group centred
  EXPECT_NEAR(result.log_parity.tail(2).sum(), 0.0, 1e-14);
  if (GetParam() == "spanning-tree") {
    EXPECT_EQ(result.tree.size(), 3u);  // a forest: 2 + 1 edges
  }
}

INSTANTIATE_TEST_SUITE_P(NewMethods, MethodProperties,
                         ::testing::Values("weighted-cpd", "spanning-tree"),
                         [](const ::testing::TestParamInfo<std::string>& param) {
                           std::string name = param.param;
                           std::replace(name.begin(), name.end(), '-', '_');
                           return name;
                         });

}  // namespace
}  // namespace paritas
