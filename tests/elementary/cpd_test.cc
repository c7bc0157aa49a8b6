// CPD checked against Summers' (1973) Jevons identity on the CPI Manual's
// six-commodity data, against direct dense least squares on the dummy
// matrix (point estimates, classic and HC0 errors), and for robustness to a
// planted gross error.
#include "paritas/elementary/cpd.h"

#include <gtest/gtest.h>

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "test_util.h"

namespace paritas {
namespace {

// Cells of one heading, owning the arrays that CpdData views.
struct Heading {
  int num_regions = 0;
  int num_items = 0;
  std::vector<int> region;
  std::vector<int> item;
  std::vector<double> log_price;
  std::vector<double> weight;

  void Add(int r, int i, double y, double w = 1.0) {
    region.push_back(r);
    item.push_back(i);
    log_price.push_back(y);
    weight.push_back(w);
  }
  CpdData Data(bool weighted = true) const {
    CpdData data;
    data.num_regions = num_regions;
    data.num_items = num_items;
    data.region = region;
    data.item = item;
    data.log_price = log_price;
    if (weighted) data.weight = weight;
    return data;
  }
  // The same cells with the roles of regions and items swapped.
  Heading Transposed() const {
    Heading t = *this;
    std::swap(t.num_regions, t.num_items);
    std::swap(t.region, t.item);
    return t;
  }
};

// Known effects plus noise; item 0 is priced everywhere (so all regions are
// linked) and every item has at least one cell; other cells with
// probability `coverage`.
struct Synthetic {
  Heading heading;
  Eigen::VectorXd true_region;
  Eigen::VectorXd true_item;
};

Synthetic MakeSynthetic(int num_regions, int num_items, double coverage, double noise_sd,
                        bool weighted, uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  std::normal_distribution<double> normal(0.0, 1.0);
  Synthetic s;
  s.heading.num_regions = num_regions;
  s.heading.num_items = num_items;
  s.true_region.resize(num_regions);
  s.true_item.resize(num_items);
  for (int r = 0; r < num_regions; ++r) s.true_region[r] = 0.1 * normal(rng);
  for (int i = 0; i < num_items; ++i) s.true_item[i] = std::log(0.5) + 6.0 * uniform(rng);
  for (int r = 0; r < num_regions; ++r) {
    for (int i = 0; i < num_items; ++i) {
      const double draw = uniform(rng);
      const double w = weighted ? 0.2 + 2.0 * uniform(rng) : 1.0;
      const double e = noise_sd * normal(rng);
      if (i == 0 || i % num_regions == r || draw < coverage) {
        s.heading.Add(r, i, s.true_region[r] + s.true_item[i] + e, w);
      }
    }
  }
  return s;
}

// Dense weighted least squares on the dummy matrix with region 0 dropped:
// estimates, classic and HC0 standard errors of a_r - sum w a.
struct DenseFit {
  Eigen::VectorXd a;
  Eigen::VectorXd b;
  Eigen::VectorXd se;
  Eigen::VectorXd se_robust;
  double sigma2 = 0.0;
};

DenseFit DenseCpd(const Heading& h, const Eigen::VectorXd& reference) {
  const int n = static_cast<int>(h.region.size());
  const int p = h.num_regions - 1 + h.num_items;
  Eigen::MatrixXd x = Eigen::MatrixXd::Zero(n, p);
  Eigen::VectorXd y(n);
  Eigen::VectorXd w(n);
  for (int k = 0; k < n; ++k) {
    if (h.region[k] > 0) x(k, h.region[k] - 1) = 1.0;
    x(k, h.num_regions - 1 + h.item[k]) = 1.0;
    y[k] = h.log_price[k];
    w[k] = h.weight[k];
  }
  const Eigen::MatrixXd xtwx = x.transpose() * w.asDiagonal() * x;
  const Eigen::MatrixXd inverse = xtwx.inverse();
  const Eigen::VectorXd theta = inverse * (x.transpose() * w.asDiagonal() * y);
  const Eigen::VectorXd e = y - x * theta;
  DenseFit fit;
  fit.sigma2 = e.dot(w.asDiagonal() * e) / (n - p);
  fit.a = Eigen::VectorXd::Zero(h.num_regions);
  fit.a.tail(h.num_regions - 1) = theta.head(h.num_regions - 1);
  fit.b = theta.tail(h.num_items);
  const double shift = reference.dot(fit.a);
  fit.a.array() -= shift;
  fit.b.array() += shift;
  const Eigen::VectorXd we = w.cwiseProduct(e);
  const Eigen::MatrixXd meat = x.transpose() * we.cwiseAbs2().asDiagonal() * x;
  const Eigen::MatrixXd sandwich = inverse * meat * inverse;
  fit.se.resize(h.num_regions);
  fit.se_robust.resize(h.num_regions);
  for (int r = 0; r < h.num_regions; ++r) {
    Eigen::VectorXd contrast = Eigen::VectorXd::Zero(p);
    for (int s = 1; s < h.num_regions; ++s) contrast[s - 1] = (s == r ? 1.0 : 0.0) - reference[s];
    fit.se[r] = std::sqrt(fit.sigma2 * contrast.dot(inverse * contrast));
    fit.se_robust[r] = std::sqrt(contrast.dot(sandwich * contrast));
  }
  return fit;
}

Heading SixCommodityHeading() {
  Heading h;
  h.num_regions = 5;
  h.num_items = 6;
  std::ifstream in(testing::TestDataPath("published/six_commodity_prices_quantities.csv"));
  std::string line;
  std::getline(in, line);  // header
  while (std::getline(in, line)) {
    std::stringstream fields(line);
    std::string situation, commodity, price;
    std::getline(fields, situation, ',');
    std::getline(fields, commodity, ',');
    std::getline(fields, price, ',');
    h.Add(std::stoi(situation) - 1, std::stoi(commodity.substr(1)) - 1, std::log(std::stod(price)));
  }
  return h;
}

TEST(Cpd, CompleteTableGivesJevonsIndices) {
  // Summers (1973): unweighted CPD on a complete table = ratios of geometric
  // means. Jevons of the five situations on situation 1: 1, 1.241920,
  // 0.956335, 0.725581, 0.632456 (CPI Manual 2004, ch. 19 data; exact values
  // from the reference README).
  const Heading h = SixCommodityHeading();
  ASSERT_EQ(h.region.size(), 30u);
  CpdOptions options;
  options.reference_weights = {1.0, 0.0, 0.0, 0.0, 0.0};
  const CpdResult result = FitCpd(h.Data(false), options);
  ASSERT_TRUE(result.identified) << result.message;
  const double jevons[] = {1.0, 1.241920, 0.956335, 0.725581, 0.632456};
  for (int r = 0; r < 5; ++r) PARITAS_EXPECT_CLOSE(std::exp(result.log_parity[r]), jevons[r], 1e-6);
  EXPECT_EQ(result.degrees_of_freedom, 30 - 5 - 6 + 1);
}

TEST(Cpd, IncompleteTableDiffersFromRatiosOfGeometricMeans) {
  // Summers (1973): with a missing price the identity no longer holds.
  Heading h = SixCommodityHeading();
  const int dropped = 2 * 6 + 3;  // situation 3, commodity c4 (price 0.5)
  h.region.erase(h.region.begin() + dropped);
  h.item.erase(h.item.begin() + dropped);
  h.log_price.erase(h.log_price.begin() + dropped);
  h.weight.erase(h.weight.begin() + dropped);
  CpdOptions options;
  options.reference_weights = {1.0, 0.0, 0.0, 0.0, 0.0};
  const CpdResult result = FitCpd(h.Data(false), options);
  ASSERT_TRUE(result.identified);
  Eigen::VectorXd mean_log = Eigen::VectorXd::Zero(5);
  Eigen::VectorXd count = Eigen::VectorXd::Zero(5);
  for (size_t k = 0; k < h.region.size(); ++k) {
    mean_log[h.region[k]] += h.log_price[k];
    count[h.region[k]] += 1.0;
  }
  mean_log = mean_log.cwiseQuotient(count);
  EXPECT_GT(std::abs(result.log_parity[2] - (mean_log[2] - mean_log[0])), 0.05);
  // Two regions that price every item still compare as Jevons: each one's
  // normal equation gives a_r = mean_i ln p_ri - mean_i b_i over all items.
  PARITAS_EXPECT_CLOSE(result.log_parity[1], mean_log[1] - mean_log[0], 1e-14);
}

TEST(RobustErrors, NamesReadBackCaseInsensitively) {
  for (RobustErrors kind :
       {RobustErrors::kOff, RobustErrors::kHc0, RobustErrors::kHc1, RobustErrors::kHc3}) {
    RobustErrors parsed = RobustErrors::kOff;
    EXPECT_TRUE(FromString(ToString(kind), &parsed));
    EXPECT_EQ(parsed, kind);
  }
  RobustErrors parsed = RobustErrors::kOff;
  EXPECT_TRUE(FromString(" HC3", &parsed));
  EXPECT_EQ(parsed, RobustErrors::kHc3);
  EXPECT_FALSE(FromString("hc2", &parsed));
}

// On a complete R x I heading every cell has hat value 1/R + 1/I - 1/(RI)
// = p / n (p = R + I - 1, n = RI; computed here from the two-way layout), so
// by the definitions of MacKinnon and White (1985) HC1 = HC0 x n/(n - p) and
// HC3 = HC0 / (1 - p/n)^2 in variance: standard errors scale by
// sqrt(n/(n - p)) and n/(n - p).
class CompleteHeadingSandwich : public ::testing::TestWithParam<std::pair<int, int>> {};

TEST_P(CompleteHeadingSandwich, Hc1AndHc3AreHc0TimesTheHandFactors) {
  const auto [num_regions, num_items] = GetParam();
  const Synthetic s = MakeSynthetic(num_regions, num_items, 1.0, 0.05, false, 31);
  const double n = num_regions * num_items, df = n - (num_regions + num_items - 1);
  ASSERT_EQ(s.heading.region.size(), static_cast<size_t>(n));
  auto fit = [&s](RobustErrors kind) {
    CpdOptions options;
    options.robust_errors = kind;
    return FitCpd(s.heading.Data(false), options);
  };
  const CpdResult hc0 = fit(RobustErrors::kHc0), hc1 = fit(RobustErrors::kHc1),
                  hc3 = fit(RobustErrors::kHc3), off = fit(RobustErrors::kOff);
  for (int r = 0; r < num_regions; ++r) {
    PARITAS_EXPECT_CLOSE(hc1.log_se_robust[r], hc0.log_se_robust[r] * std::sqrt(n / df), 1e-12);
    PARITAS_EXPECT_CLOSE(hc3.log_se_robust[r], hc0.log_se_robust[r] * n / df, 1e-10);
    EXPECT_TRUE(std::isnan(off.log_se_robust[r]));
    EXPECT_EQ(hc3.log_se[r], off.log_se[r]);
  }
}

// Fewer regions than items (items eliminated) and more (regions eliminated).
INSTANTIATE_TEST_SUITE_P(BothEliminationOrders, CompleteHeadingSandwich,
                         ::testing::Values(std::make_pair(6, 9), std::make_pair(9, 6)),
                         [](const ::testing::TestParamInfo<std::pair<int, int>>& param_info) {
                           return std::to_string(param_info.param.first) + "Regions" +
                                  std::to_string(param_info.param.second) + "Items";
                         });

// A simulation (computed here): 2,000 complete headings of 10 regions x 8
// items with equal error variances. Every hat value is p/n = 17/80, so
// E[e_k^2] = sigma^2 (1 - p/n) and the expected HC1 variance is exactly the
// true one, HC0's is 63/80 = 0.79 of it and HC3's 80/63 = 1.27 (MacKinnon
// and White 1985). The mean sandwich variance over the mean squared error
// of the estimates (Monte Carlo error about 0.03) must show this.
TEST(CpdSandwich, OnSimulatedHeadingsHc1IsUnbiasedHc0LowHc3High) {
  double squared_error = 0.0, hc0 = 0.0, hc1 = 0.0, hc3 = 0.0;
  for (int rep = 0; rep < 2000; ++rep) {
    const Synthetic s = MakeSynthetic(10, 8, 1.0, 0.05, false, 5000 + rep);
    const Eigen::VectorXd truth = s.true_region.array() - s.true_region.mean();
    auto fit = [&s](RobustErrors kind) {
      CpdOptions options;
      options.robust_errors = kind;
      return FitCpd(s.heading.Data(false), options);
    };
    const CpdResult f0 = fit(RobustErrors::kHc0), f1 = fit(RobustErrors::kHc1),
                    f3 = fit(RobustErrors::kHc3);
    for (int r = 0; r < 10; ++r) {
      squared_error += std::pow(f0.log_parity[r] - truth[r], 2);
      hc0 += std::pow(f0.log_se_robust[r], 2);
      hc1 += std::pow(f1.log_se_robust[r], 2);
      hc3 += std::pow(f3.log_se_robust[r], 2);
    }
  }
  std::printf("sandwich variance / squared error, 10 regions x 8 items: HC0 %.3f, HC1 %.3f, "
              "HC3 %.3f\n",
              hc0 / squared_error, hc1 / squared_error, hc3 / squared_error);
  EXPECT_NEAR(hc1 / squared_error, 1.0, 0.08);
  EXPECT_NEAR(hc0 / squared_error, 63.0 / 80.0, 0.07);
  EXPECT_NEAR(hc3 / squared_error, 80.0 / 63.0, 0.1);
}

// A cell that alone prices its item has hat value 1 and residual 0: HC3
// gives it no weight rather than 0 / 0, so the errors are those of the
// heading without it (its item effect absorbs it; nothing else changes).
// Run with fewer and with more regions than items.
TEST(CpdSandwich, Hc3GivesCellsWithHatValueOneNoWeight) {
  for (const auto& [num_regions, num_items] : {std::make_pair(5, 8), std::make_pair(12, 4)}) {
    const Synthetic s = MakeSynthetic(num_regions, num_items, 1.0, 0.05, false, 33);
    Heading with = s.heading;
    with.num_items = num_items + 1;
    with.Add(2, num_items, 1.5);
    CpdOptions options;
    options.robust_errors = RobustErrors::kHc3;
    const CpdResult result = FitCpd(with.Data(false), options);
    const CpdResult without = FitCpd(s.heading.Data(false), options);
    ASSERT_TRUE(result.identified && without.identified);
    for (int r = 0; r < num_regions; ++r) {
      PARITAS_EXPECT_CLOSE(result.log_se_robust[r], without.log_se_robust[r], 1e-10);
    }
  }
}

class CpdShape : public ::testing::TestWithParam<std::pair<int, int>> {};

TEST_P(CpdShape, MatchesDenseWeightedLeastSquaresOnTheDummyMatrix) {
  const auto [num_regions, num_items] = GetParam();
  const Synthetic s = MakeSynthetic(num_regions, num_items, 0.6, 0.05, true, 11);
  Eigen::VectorXd reference = Eigen::VectorXd::LinSpaced(num_regions, 1.0, 2.0);
  CpdOptions options;
  options.reference_weights.assign(reference.data(), reference.data() + num_regions);
  options.robust_errors = paritas::RobustErrors::kHc0;
  reference /= reference.sum();
  const CpdResult result = FitCpd(s.heading.Data(), options);
  ASSERT_TRUE(result.identified) << result.message;
  const DenseFit dense = DenseCpd(s.heading, reference);
  PARITAS_EXPECT_CLOSE(result.sigma2, dense.sigma2, 1e-10);
  for (int r = 0; r < num_regions; ++r) {
    PARITAS_EXPECT_CLOSE(result.log_parity[r], dense.a[r], 1e-11);
    PARITAS_EXPECT_CLOSE(result.log_se[r], dense.se[r], 1e-11);
    PARITAS_EXPECT_CLOSE(result.log_se_robust[r], dense.se_robust[r], 1e-11);
  }
  for (int i = 0; i < num_items; ++i)
    PARITAS_EXPECT_CLOSE(result.item_effect[i], dense.b[i], 1e-11);
  PARITAS_EXPECT_CLOSE(reference.dot(result.log_parity), 0.0, 1e-14);
  for (size_t k = 0; k < s.heading.region.size(); ++k) {
    PARITAS_EXPECT_CLOSE(result.fitted[k] + result.residual[k], s.heading.log_price[k], 1e-13);
  }
}

// Fewer regions than items (items eliminated), more (regions eliminated),
// and a tie.
INSTANTIATE_TEST_SUITE_P(BothEliminationOrders, CpdShape,
                         ::testing::Values(std::make_pair(6, 11), std::make_pair(11, 6),
                                           std::make_pair(7, 7), std::make_pair(30, 2)),
                         [](const ::testing::TestParamInfo<std::pair<int, int>>& param_info) {
                           return std::to_string(param_info.param.first) + "Regions" + std::to_string(param_info.param.second) +
                                  "Items";
                         });

TEST(Cpd, ResultDoesNotDependOnWhichBlockIsEliminated) {
  // The model is symmetric in regions and items, so the transposed heading
  // (eliminating the other block) must return the same effects swapped.
  const Synthetic s = MakeSynthetic(9, 14, 0.5, 0.05, true, 5);
  const CpdResult fit = FitCpd(s.heading.Data(), CpdOptions());
  const Heading t = s.heading.Transposed();
  const CpdResult swapped = FitCpd(t.Data(), CpdOptions());
  ASSERT_TRUE(fit.identified && swapped.identified);
  const double item_mean = swapped.item_effect.mean();
  for (int r = 0; r < 9; ++r) {
    PARITAS_EXPECT_CLOSE(fit.log_parity[r], swapped.item_effect[r] - item_mean, 1e-12);
  }
  for (size_t k = 0; k < t.region.size(); ++k) {
    PARITAS_EXPECT_CLOSE(fit.fitted[k], swapped.fitted[k], 1e-12);
  }
  PARITAS_EXPECT_CLOSE(fit.sigma2, swapped.sigma2, 1e-12);
}

TEST(CpdSandwich, ErrorsHaveTheSameBitsWithAndWithoutTheClassicOnes) {
  // With regions eliminated the sandwich reuses the classic errors' solve;
  // without classic errors it solves on its own. Both must give the same bits.
  for (const auto& [num_regions, num_items] : {std::make_pair(40, 7), std::make_pair(7, 40)}) {
    const Synthetic s = MakeSynthetic(num_regions, num_items, 0.6, 0.05, true, 21);
    for (RobustErrors kind : {RobustErrors::kHc0, RobustErrors::kHc1, RobustErrors::kHc3}) {
      CpdOptions options;
      options.robust_errors = kind;
      options.reference_weights.assign(num_regions, 1.0);
      options.reference_weights[1] = 3.0;
      const CpdResult with_classic = FitCpd(s.heading.Data(), options);
      options.compute_standard_errors = false;
      const CpdResult without = FitCpd(s.heading.Data(), options);
      ASSERT_TRUE(with_classic.identified && without.identified);
      EXPECT_TRUE(with_classic.log_se.array().isFinite().all());
      EXPECT_TRUE(without.log_se.array().isNaN().all());
      for (int r = 0; r < num_regions; ++r) {
        EXPECT_EQ(with_classic.log_se_robust[r], without.log_se_robust[r])
            << num_regions << " regions, " << ToString(kind) << ", region " << r;
      }
    }
  }
}

TEST(Cpd, ReferenceWeightsAreRenormalisedOverRegionsPresent) {
  // Region 3 has no cells: its weight is ignored and its parity is NaN.
  Synthetic s = MakeSynthetic(4, 8, 1.0, 0.05, false, 2);
  Heading h;
  h.num_regions = 4;
  h.num_items = 8;
  for (size_t k = 0; k < s.heading.region.size(); ++k) {
    if (s.heading.region[k] != 3)
      h.Add(s.heading.region[k], s.heading.item[k], s.heading.log_price[k]);
  }
  CpdOptions options;
  options.reference_weights = {1.0, 3.0, 0.0, 100.0};
  const CpdResult weighted = FitCpd(h.Data(false), options);
  ASSERT_TRUE(weighted.identified);
  EXPECT_TRUE(std::isnan(weighted.log_parity[3]));
  EXPECT_TRUE(std::isnan(weighted.log_se[3]));
  PARITAS_EXPECT_CLOSE(0.25 * weighted.log_parity[0] + 0.75 * weighted.log_parity[1], 0.0, 1e-15);
  EXPECT_EQ(weighted.num_regions_present, 3);
  const CpdResult plain = FitCpd(h.Data(false), CpdOptions());
  PARITAS_EXPECT_CLOSE(plain.log_parity.head(3).sum(), 0.0, 1e-15);
  // Differences between regions do not depend on the reference.
  PARITAS_EXPECT_CLOSE(weighted.log_parity[2] - weighted.log_parity[0],
                       plain.log_parity[2] - plain.log_parity[0], 1e-14);
  // The fitted prices are the same whatever the reference.
  for (size_t k = 0; k < h.region.size(); ++k) {
    PARITAS_EXPECT_CLOSE(weighted.fitted[k], plain.fitted[k], 1e-14);
  }
  // A reference with weight only on absent regions falls back to the mean.
  options.reference_weights = {0.0, 0.0, 0.0, 1.0};
  const CpdResult fallback = FitCpd(h.Data(false), options);
  ASSERT_TRUE(fallback.identified);
  PARITAS_EXPECT_CLOSE(fallback.log_parity[0], plain.log_parity[0], 1e-14);
  EXPECT_EQ(fallback.message,
            "no region with a positive reference weight has cells; parities are relative to the "
            "plain mean of the regions present");
}

TEST(Cpd, UnlinkedRegionsAreReportedAsGroupsWithoutParities) {
  Heading h;
  h.num_regions = 5;
  h.num_items = 4;
  h.Add(0, 0, 1.0);
  h.Add(1, 0, 1.1);
  h.Add(1, 1, 2.0);
  h.Add(4, 1, 2.2);
  h.Add(2, 2, 0.5);
  h.Add(2, 3, 0.7);  // region 3 has no cells
  const CpdResult result = FitCpd(h.Data(), CpdOptions());
  EXPECT_FALSE(result.identified);
  ASSERT_EQ(result.groups.size(), 2u);
  EXPECT_EQ(result.groups[0], (std::vector<int>{0, 1, 4}));
  EXPECT_EQ(result.groups[1], (std::vector<int>{2}));
  EXPECT_TRUE(std::isnan(result.log_parity[0]));
  EXPECT_EQ(result.message,
            "the regions form 2 groups that share no item (sizes 3, 1); parities are defined "
            "only within a group");
  EXPECT_EQ(LinkedRegionGroups(5, 4, h.region, h.item), result.groups);
}

TEST(Cpd, WithoutResidualDegreesOfFreedomGivesParitiesButNoClassicErrors) {
  Heading h;
  h.num_regions = 2;
  h.num_items = 1;
  h.Add(0, 0, 1.0);
  h.Add(1, 0, 1.5);
  const CpdResult result = FitCpd(h.Data(), CpdOptions());
  ASSERT_TRUE(result.identified);
  EXPECT_EQ(result.degrees_of_freedom, 0);
  PARITAS_EXPECT_CLOSE(result.log_parity[1] - result.log_parity[0], 0.5, 1e-15);
  EXPECT_TRUE(std::isnan(result.sigma2));
  EXPECT_TRUE(std::isnan(result.log_se[0]));
}

TEST(Cpd, RejectsBadCellsWithAMessage) {
  Heading h;
  h.num_regions = 2;
  h.num_items = 2;
  h.Add(0, 0, 1.0);
  h.Add(1, 0, 1.0, 0.0);
  CpdResult result = FitCpd(h.Data(), CpdOptions());
  EXPECT_FALSE(result.identified);
  EXPECT_EQ(result.message, "cell 1: weight 0 is not a positive number");
  h.weight[1] = 1.0;
  h.item[1] = 2;
  result = FitCpd(h.Data(), CpdOptions());
  EXPECT_EQ(result.message, "cell 1: item index 2 is outside 0..1");
  h.item[1] = 0;
  h.log_price[0] = std::nan("");
  result = FitCpd(h.Data(), CpdOptions());
  EXPECT_EQ(result.message, "cell 0: log price nan is not finite");
  EXPECT_EQ(FitCpd(Heading().Data(), CpdOptions()).message, "the heading has no cells");
}

TEST(CpdOptions, DefaultsAreValidAndBadValuesAreNamed) {
  std::string error;
  EXPECT_TRUE(CpdOptions().IsValid(&error));
  CpdOptions options;
  options.robust_scale = -1.0;
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error,
            "robust_scale is -1; it must be 0 (estimate it) or a positive number of log points");
  options.robust_scale = std::nan("");
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error,
            "robust_scale is nan; it must be 0 (estimate it) or a positive number of log points");
  options = CpdOptions();
  options.reference_weights = {1.0, -0.5};
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "reference_weights[1] is -0.5; reference weights must be finite and >= 0");
  options.reference_weights = {0.0, 0.0};
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "reference_weights are all 0; at least one region needs a positive weight");
  // FitCpd passes the option error on.
  Heading h;
  h.num_regions = 2;
  h.num_items = 1;
  h.Add(0, 0, 1.0);
  EXPECT_EQ(FitCpd(h.Data(), options).message,
            "invalid CPD options: reference_weights are all 0; at least one region needs a "
            "positive weight");
}

TEST(CpdLoss, NamesRoundTripCaseInsensitively) {
  for (CpdLoss loss : {CpdLoss::kLeastSquares, CpdLoss::kHuber, CpdLoss::kCauchy}) {
    CpdLoss parsed = CpdLoss::kLeastSquares;
    ASSERT_TRUE(FromString(ToString(loss), &parsed));
    EXPECT_EQ(parsed, loss);
  }
  CpdLoss parsed = CpdLoss::kLeastSquares;
  EXPECT_TRUE(FromString(" Huber", &parsed));
  EXPECT_EQ(parsed, CpdLoss::kHuber);
  EXPECT_FALSE(FromString("tukey", &parsed));
}

class RobustCpd : public ::testing::TestWithParam<CpdLoss> {};

TEST_P(RobustCpd, PlantedGrossErrorMovesLeastSquaresButNotTheRobustFit) {
  // One price 20 times too high (+3.0 log points) in region 3.
  Synthetic s = MakeSynthetic(15, 25, 0.8, 0.02, false, 42);
  int planted = -1;
  for (size_t k = 0; k < s.heading.region.size(); ++k) {
    if (s.heading.region[k] == 3 && s.heading.item[k] == 5) planted = static_cast<int>(k);
  }
  ASSERT_GE(planted, 0);
  s.heading.log_price[planted] += std::log(20.0);
  const Eigen::VectorXd truth = s.true_region.array() - s.true_region.mean();

  const CpdResult plain = FitCpd(s.heading.Data(false), CpdOptions());
  CpdOptions options;
  options.loss = GetParam();
  options.robust_errors = paritas::RobustErrors::kHc0;
  const CpdResult robust = FitCpd(s.heading.Data(false), options);
  ASSERT_TRUE(plain.identified && robust.identified) << robust.message;
  EXPECT_GT(std::abs(plain.log_parity[3] - truth[3]), 0.08);
  EXPECT_GT(robust.robust_scale_used, 0.0);
  for (int r = 0; r < 15; ++r) EXPECT_NEAR(robust.log_parity[r], truth[r], 0.02) << "region " << r;
  // The planted cell stands out: its standardised residual e / sigma (all
  // weights 1) is far beyond every other.
  const double sigma = std::sqrt(robust.sigma2);
  double next = 0.0;
  for (size_t k = 0; k < s.heading.region.size(); ++k) {
    if (static_cast<int>(k) != planted) next = std::max(next, std::abs(robust.residual[k]) / sigma);
  }
  const double planted_z = std::abs(robust.residual[planted]) / sigma;
  EXPECT_GT(planted_z, 20.0);
  EXPECT_GT(planted_z, 10.0 * next);
  EXPECT_TRUE(std::isfinite(robust.log_se[3]));
  EXPECT_LT(robust.log_se[3], plain.log_se[3]);
}

TEST_P(RobustCpd, SameInputGivesIdenticalOutput) {
  Synthetic s = MakeSynthetic(12, 30, 0.7, 0.05, true, 8);
  s.heading.log_price[17] -= 2.0;
  CpdOptions options;
  options.loss = GetParam();
  const CpdResult first = FitCpd(s.heading.Data(), options);
  const CpdResult second = FitCpd(s.heading.Data(), options);
  ASSERT_TRUE(first.identified);
  for (int r = 0; r < 12; ++r) EXPECT_EQ(first.log_parity[r], second.log_parity[r]);
  EXPECT_EQ(first.robust_scale_used, second.robust_scale_used);
}

TEST_P(RobustCpd, GivenScaleIsUsedAndWorksWhenRegionsAreEliminated) {
  // More regions than items: the solver eliminates the regions.
  Synthetic s = MakeSynthetic(40, 6, 0.8, 0.02, false, 9);
  s.heading.log_price[10] += 3.0;
  CpdOptions options;
  options.loss = GetParam();
  options.robust_scale = 0.05;
  const CpdResult robust = FitCpd(s.heading.Data(false), options);
  ASSERT_TRUE(robust.identified) << robust.message;
  EXPECT_EQ(robust.robust_scale_used, 0.05);
  const Eigen::VectorXd truth = s.true_region.array() - s.true_region.mean();
  for (int r = 0; r < 40; ++r) EXPECT_NEAR(robust.log_parity[r], truth[r], 0.04) << "region " << r;
}

TEST_P(RobustCpd, EstimatedScaleIsTheMadOfTheFinalResiduals) {
  // The fit stops at a fixed point: the threshold it used is c times
  // median |e| / 0.6745 of its own final residuals (weights all 1).
  Synthetic s = MakeSynthetic(10, 14, 0.8, 0.05, false, 12);
  s.heading.log_price[5] += std::log(10.0);
  s.heading.log_price[40] -= std::log(10.0);
  CpdOptions options;
  options.loss = GetParam();
  const CpdResult robust = FitCpd(s.heading.Data(false), options);
  ASSERT_TRUE(robust.identified) << robust.message;
  EXPECT_TRUE(robust.message.empty()) << robust.message;
  EXPECT_GT(robust.num_robust_iterations, 2);
  std::vector<double> size(robust.residual.size());
  for (Eigen::Index k = 0; k < robust.residual.size(); ++k) size[k] = std::abs(robust.residual[k]);
  std::sort(size.begin(), size.end());
  const size_t n = size.size();
  const double median = n % 2 ? size[n / 2] : 0.5 * (size[n / 2 - 1] + size[n / 2]);
  const double c = GetParam() == CpdLoss::kHuber ? 1.345 : 2.385;
  PARITAS_EXPECT_CLOSE(robust.robust_scale_used, c * median / 0.6744897501960817, 1e-9);
}

// A simulation (computed here): 400 complete headings of 10 regions x 8
// items, noise sd 0.05, 4 % of prices ten times too high. robust-cpd must be
// closer to the truth than least squares, and its Huber sandwich errors
// must match the actual spread of its estimates: mean log_se^2 over the
// variance of (estimate - truth), pooled over regions, within 0.75-1.3
// (Monte Carlo error about 0.07 with 400 x 10 estimates).
TEST(RobustCpd, HuberSandwichErrorsMatchTheSpreadOfTheEstimates) {
  std::mt19937_64 rng(2024);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  double ss_robust = 0.0, ss_plain = 0.0, se2 = 0.0;
  int count = 0;
  for (int rep = 0; rep < 400; ++rep) {
    Synthetic s = MakeSynthetic(10, 8, 1.0, 0.05, false, 1000 + rep);
    for (double& y : s.heading.log_price) {
      if (uniform(rng) < 0.04) y += std::log(10.0);
    }
    const Eigen::VectorXd truth = s.true_region.array() - s.true_region.mean();
    CpdOptions options;
    options.loss = CpdLoss::kHuber;
    const CpdResult robust = FitCpd(s.heading.Data(false), options);
    const CpdResult plain = FitCpd(s.heading.Data(false), CpdOptions());
    ASSERT_TRUE(robust.identified && plain.identified);
    for (int r = 0; r < 10; ++r) {
      ss_robust += std::pow(robust.log_parity[r] - truth[r], 2);
      ss_plain += std::pow(plain.log_parity[r] - truth[r], 2);
      se2 += robust.log_se[r] * robust.log_se[r];
      ++count;
    }
  }
  const double rms_robust = std::sqrt(ss_robust / count), rms_plain = std::sqrt(ss_plain / count);
  const double ratio = se2 / ss_robust;
  std::printf("robust-cpd rms error %.4f, least squares %.4f; mean se^2 / mean squared error %.3f\n",
              rms_robust, rms_plain, ratio);
  EXPECT_LT(rms_robust, 0.8 * rms_plain);
  EXPECT_GT(ratio, 0.75);
  EXPECT_LT(ratio, 1.3);
}

INSTANTIATE_TEST_SUITE_P(HuberAndCauchy, RobustCpd,
                         ::testing::Values(CpdLoss::kHuber, CpdLoss::kCauchy),
                         [](const ::testing::TestParamInfo<CpdLoss>& param_info) { return ToString(param_info.param); });

}  // namespace
}  // namespace paritas
