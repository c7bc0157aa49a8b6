// Tests of the additive methods (geary-khamis, ikle-dikhanov-balk): their
// defining equations checked by code written here independently of the
// solver, additivity, the invariances of the published definitions, and
// incomplete and unlinked surveys. The Geary-Khamis cross-check against an
// independent eigenvector solve is tests/python/additive_numpy_check.py.
#include <cmath>
#include <random>
#include <string>
#include <vector>

#include "paritas/aggregation/aggregation.h"
#include "paritas/base/csv.h"
#include "paritas/compute/compute.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey_loader.h"
#include "test_util.h"

namespace paritas {
namespace {

using testing::IsClose;

const AggregationMethod& Method(const std::string& name) {
  const AggregationMethod* method = FindAggregationMethod(name);
  EXPECT_NE(method, nullptr) << name;
  return *method;
}

AggregateParities Solve(const NodeArrays& arrays, const std::string& name) {
  const AggregationMethod& method = Method(name);
  return AggregateFromBilaterals(arrays, NodeBilaterals(arrays, method.BilateralsNeeded()), method);
}

// A seeded survey of regions x headings with a share `coverage` of cells
// priced (every region keeps at least two headings, every heading a region);
// region sizes spread over two orders of magnitude, as regions do.
NodeArrays Generated(int num_regions, int num_headings, double coverage, unsigned seed) {
  std::mt19937 random(seed);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  std::normal_distribution<double> normal(0.0, 0.2);
  NodeArrays arrays;
  arrays.price.resize(num_regions, num_headings);
  arrays.expenditure.resize(num_regions, num_headings);
  for (int r = 0; r < num_regions; ++r) {
    const double size = std::exp(4.6 * uniform(random));
    for (int h = 0; h < num_headings; ++h) {
      const bool priced =
          uniform(random) < coverage || h == r % num_headings || h == (r + 1) % num_headings;
      arrays.price(r, h) = priced ? std::exp(normal(random) + 0.1 * h) : std::nan("");
      arrays.expenditure(r, h) = size * (0.2 + uniform(random));
    }
  }
  return arrays;
}

// The six-commodity, five-situation data (CPI Manual 2004, ch. 19, tables
// 19.1-19.2) as five regions, one heading per commodity: p = price, e = p q.
NodeArrays SixCommodity() {
  const std::string text =
      testing::ReadTextFile(testing::TestDataPath("published/six_commodity_prices_quantities.csv"));
  CsvReader reader(text);
  CsvRecord record;
  reader.Next(&record);  // header
  NodeArrays arrays;
  arrays.price.resize(5, 6);
  arrays.expenditure.resize(5, 6);
  while (reader.Next(&record)) {
    const int r = std::stoi(std::string(record.fields[0])) - 1;
    const int h = std::stoi(std::string(record.fields[1]).substr(1)) - 1;
    const double price = std::stod(std::string(record.fields[2]));
    arrays.price(r, h) = price;
    arrays.expenditure(r, h) = price * std::stod(std::string(record.fields[3]));
  }
  return arrays;
}

bool Used(const NodeArrays& a, int r, int h) {
  return std::isfinite(a.price(r, h)) && a.price(r, h) > 0 && std::isfinite(a.expenditure(r, h)) &&
         a.expenditure(r, h) > 0;
}

// Largest relative residual of the defining equations at `log_parity`:
// PPP_r = sum_h e_rh / sum_h pi_h q_rh with the method's pi_h written out
// here: Geary (1958), Khamis (1972) pi_h = sum_r (e_rh / PPP_r) / sum_r q_rh;
// Balk (1996) 1 / pi_h = sum_r s_rh (PPP_r / p_rh) / sum_r s_rh.
double EquationResidual(const NodeArrays& a, const Eigen::VectorXd& log_parity, bool geary_khamis) {
  const int num_regions = static_cast<int>(a.price.rows()),
            num_headings = static_cast<int>(a.price.cols());
  std::vector<double> total(num_regions, 0.0);
  for (int r = 0; r < num_regions; ++r) {
    for (int h = 0; h < num_headings; ++h) total[r] += Used(a, r, h) ? a.expenditure(r, h) : 0.0;
  }
  std::vector<double> pi(num_headings);
  for (int h = 0; h < num_headings; ++h) {
    double numerator = 0.0, denominator = 0.0;
    for (int r = 0; r < num_regions; ++r) {
      if (!Used(a, r, h)) continue;
      const double ppp = std::exp(log_parity(r)), e = a.expenditure(r, h), p = a.price(r, h);
      numerator += geary_khamis ? e / ppp : e / total[r];
      denominator += geary_khamis ? e / p : e / total[r] * ppp / p;
    }
    pi[h] = numerator / denominator;
  }
  double worst = 0.0;
  for (int r = 0; r < num_regions; ++r) {
    double real = 0.0;
    for (int h = 0; h < num_headings; ++h)
      real += Used(a, r, h) ? pi[h] * a.expenditure(r, h) / a.price(r, h) : 0.0;
    worst = std::max(worst, std::abs(total[r] / real / std::exp(log_parity(r)) - 1.0));
  }
  return worst;
}

// Two blocks of ten regions with no heading in common but one cell: region 0
// spends `link` on a heading of the other block.
NodeArrays WeaklyLinked(double link) {
  NodeArrays arrays;
  arrays.price = Eigen::MatrixXd::Constant(20, 10, std::nan(""));
  arrays.expenditure = arrays.price;
  for (int r = 0; r < 20; ++r) {
    for (int h = r < 10 ? 0 : 5; h < (r < 10 ? 5 : 10); ++h) {
      arrays.price(r, h) = std::exp(0.1 * ((7 * r + 3 * h) % 5) - 0.2);
      arrays.expenditure(r, h) = 1.0 + 0.1 * ((r + 2 * h) % 7);
    }
  }
  arrays.price(0, 5) = 3.0;
  arrays.expenditure(0, 5) = link;
  return arrays;
}

bool StartsWith(const std::string& text, const std::string& start) {
  return text.rfind(start, 0) == 0;
}

class Additive : public ::testing::TestWithParam<std::string> {};

INSTANTIATE_TEST_SUITE_P(Methods, Additive,
                         ::testing::Values("geary-khamis", "ikle-dikhanov-balk"));

TEST_P(Additive, IsRegisteredAsAdditiveAndNeedsNoBilaterals) {
  EXPECT_TRUE(Method(GetParam()).Properties().additive);
  const BilateralOptions needed = Method(GetParam()).BilateralsNeeded();
  EXPECT_FALSE(needed.fisher || needed.tornqvist || needed.laspeyres_paasche || needed.num_matched);
}

// The equations are recomputed here from their published form, not by the solver.
TEST_P(Additive, SatisfiesItsDefiningEquationsOnTheSixCommodityData) {
  const NodeArrays arrays = SixCommodity();
  const AggregateParities result = Solve(arrays, GetParam());
  ASSERT_TRUE(result.failure.empty()) << result.failure;
  ASSERT_TRUE(result.identified);
  EXPECT_TRUE(result.complete);
  EXPECT_NEAR(result.log_parity.sum(), 0.0, 1e-13);
  EXPECT_LT(EquationResidual(arrays, result.log_parity, GetParam() == "geary-khamis"), 1e-12);
}

// Geary (1958), Khamis (1972): real expenditure at international prices adds
// up; after any normalisation (here a reference region) each row of
// RealByHeading sums to E_r / PPP_r.
TEST_P(Additive, RealExpenditureByHeadingAddsUpToTheNodesRealExpenditure) {
  const NodeArrays arrays = Generated(60, 12, 0.6, 7);
  Eigen::VectorXd log_parity = Solve(arrays, GetParam()).log_parity;
  log_parity.array() -= log_parity(3);
  const Eigen::MatrixXd real = RealByHeading(arrays, log_parity, Method(GetParam()));
  ASSERT_EQ(real.rows(), 60);
  for (int r = 0; r < 60; ++r) {
    double nominal = 0.0;
    for (int h = 0; h < 12; ++h) nominal += Used(arrays, r, h) ? arrays.expenditure(r, h) : 0.0;
    double sum = 0.0;
    for (int h = 0; h < 12; ++h) sum += Used(arrays, r, h) ? real(r, h) : 0.0;
    EXPECT_TRUE(IsClose(sum, nominal / std::exp(log_parity(r)), 1e-12)) << "region " << r;
  }
}

// Khamis (1972) lists invariance to the units of each commodity: a heading's
// parities in other units (times 37 in every region) change nothing.
TEST_P(Additive, IsInvariantToTheUnitsOfEachHeadingsParities) {
  const NodeArrays arrays = Generated(40, 9, 0.7, 11);
  NodeArrays scaled = arrays;
  scaled.price.col(4) *= 37.0;
  const AggregateParities a = Solve(arrays, GetParam()), b = Solve(scaled, GetParam());
  const Eigen::MatrixXd real_a = RealByHeading(arrays, a.log_parity, Method(GetParam()));
  const Eigen::MatrixXd real_b = RealByHeading(scaled, b.log_parity, Method(GetParam()));
  for (int r = 0; r < 40; ++r) {
    EXPECT_NEAR(a.log_parity(r), b.log_parity(r), 1e-12);
    for (int h = 0; h < 9; ++h) EXPECT_TRUE(IsClose(real_a(r, h), real_b(r, h), 1e-12));
  }
}

// Symmetric treatment of regions: reversing their order reverses the results.
TEST_P(Additive, PermutingRegionsPermutesTheResults) {
  const NodeArrays arrays = Generated(50, 10, 0.6, 13);
  NodeArrays reversed = arrays;
  reversed.price = arrays.price.colwise().reverse();
  reversed.expenditure = arrays.expenditure.colwise().reverse();
  const AggregateParities a = Solve(arrays, GetParam()), b = Solve(reversed, GetParam());
  for (int r = 0; r < 50; ++r) EXPECT_NEAR(a.log_parity(r), b.log_parity(49 - r), 1e-12);
}

// Base invariance: relative parities do not depend on the reference region.
TEST_P(Additive, GivesTheSameRelativeParitiesWhicheverRegionIsTheReference) {
  RunConfig config;
  std::string error;
  ASSERT_TRUE(LoadRunConfig(testing::SourcePath("config/demo.yaml"), &config, &error)) << error;
  Survey survey;
  LoadSummary load;
  ASSERT_TRUE(LoadSurvey(config, LoadOptions(), &survey, &load)) << load.message;
  ComputeOptions options = ComputeOptions::FromConfig(config);
  options.aggregation = GetParam();
  ParityResult by_region[2];
  const char* references[2] = {"cap", "fen"};
  for (int k = 0; k < 2; ++k) {
    options.reference = Reference::FromString(references[k]);
    ComputeSummary summary;
    ASSERT_TRUE(ComputeParities(survey, options, &by_region[k], &summary)) << summary.message;
  }
  const Eigen::VectorXd& a = by_region[0].nodes.front().parity;
  const Eigen::VectorXd& b = by_region[1].nodes.front().parity;
  for (int r = 0; r < a.size(); ++r) EXPECT_NEAR(std::log(a(r) / a(1) * b(1) / b(r)), 0.0, 1e-12);
}

// The demo's island group spends on rents without a rents parity: its row
// values that spending at the node parity, and every node still adds up
// to parities.csv's real expenditure.
TEST_P(Additive, RealByHeadingOfEveryDemoNodeSumsToItsRealExpenditure) {
  RunConfig config;
  std::string error;
  ASSERT_TRUE(LoadRunConfig(testing::SourcePath("config/demo.yaml"), &config, &error)) << error;
  Survey survey;
  LoadSummary load;
  ASSERT_TRUE(LoadSurvey(config, LoadOptions(), &survey, &load)) << load.message;
  ComputeOptions options = ComputeOptions::FromConfig(config);
  options.aggregation = GetParam();
  ParityResult result;
  ComputeSummary summary;
  ASSERT_TRUE(ComputeParities(survey, options, &result, &summary)) << summary.message;
  int num_checked = 0;
  for (const NodeResult& node : result.nodes) {
    if (node.is_heading) continue;
    const Eigen::MatrixXd real =
        RealByHeading(NodeInputArrays(survey, result, node.node),
                      (node.parity.array() / 100.0).log().matrix(), Method(GetParam()));
    for (int r = 0; r < real.rows(); ++r) {
      if (!std::isfinite(node.real_expenditure(r))) continue;
      const double sum = real.row(r).array().isFinite().select(real.row(r).array(), 0.0).sum();
      EXPECT_TRUE(IsClose(sum, node.real_expenditure(r), 1e-12)) << node.node << " " << r;
      ++num_checked;
    }
  }
  EXPECT_GT(num_checked, 100);
}

// Half the cells missing, 400 regions: still converges (computed here).
TEST_P(Additive, ConvergesOnAnIncompleteSurveyOfManyRegions) {
  const NodeArrays arrays = Generated(400, 30, 0.5, 17);
  const AggregateParities result = Solve(arrays, GetParam());
  ASSERT_TRUE(result.failure.empty()) << result.failure;
  EXPECT_TRUE(result.identified);
  EXPECT_FALSE(result.complete);
  EXPECT_TRUE(result.log_parity.allFinite());
  EXPECT_LT(EquationResidual(arrays, result.log_parity, GetParam() == "geary-khamis"), 1e-11);
}

// Regions 0-1 and 2-3 share no heading: two groups, each solved on its own.
TEST_P(Additive, ReportsRegionsWithNoHeadingInCommonAsUnlinkedGroups) {
  NodeArrays arrays;
  const double nan = std::nan("");
  arrays.price.resize(5, 4);
  arrays.price << 1.0, 1.2, nan, nan,  //
      0.9, 1.1, nan, nan,              //
      nan, nan, 2.0, 1.0,              //
      nan, nan, 1.5, 1.3,              //
      nan, nan, nan, nan;
  arrays.expenditure = Eigen::MatrixXd::Constant(5, 4, 10.0);
  const AggregateParities result = Solve(arrays, GetParam());
  EXPECT_FALSE(result.identified);
  ASSERT_EQ(result.groups.size(), 2u);
  EXPECT_EQ(result.groups[0], (std::vector<int>{0, 1}));
  EXPECT_EQ(result.groups[1], (std::vector<int>{2, 3}));
  EXPECT_NEAR(result.log_parity(0) + result.log_parity(1), 0.0, 1e-14);
  EXPECT_NEAR(result.log_parity(2) + result.log_parity(3), 0.0, 1e-14);
  EXPECT_TRUE(std::isnan(result.log_parity(4)));
}

// A link of about 0.15 % of one region's spending is enough; the slow contraction
// along it must not stop the loop early (computed here: with a step test
// alone, a link of 1e-9 gave a ln parity 2e-3 off the fixed point).
TEST_P(Additive, ConvergesWhenTwoBlocksShareOneSmallCell) {
  const NodeArrays arrays = WeaklyLinked(0.01);
  const AggregateParities result = Solve(arrays, GetParam());
  ASSERT_TRUE(result.failure.empty()) << result.failure;
  EXPECT_LT(EquationResidual(arrays, result.log_parity, GetParam() == "geary-khamis"), 1e-11);
}

// Linked through a billionth of one region's spending, the level of one
// block against the other is not determined in double precision: the node
// fails with a message and no number.
TEST(GearyKhamis, FailsWhenTheRegionsAreLinkedThroughAlmostNoSpending) {
  const AggregateParities result = Solve(WeaklyLinked(1e-9), "geary-khamis");
  EXPECT_TRUE(StartsWith(result.failure,
                         "geary-khamis: the parities are not well determined (the system's "
                         "reciprocal condition number is "))
      << result.failure;
  EXPECT_TRUE(result.failure.find("); some regions are linked to the others through almost no "
                                  "spending") != std::string::npos);
  EXPECT_TRUE(result.log_parity.array().isNaN().all());
}

// The same at a millionth: Geary-Khamis is still determined, the
// Ikle-Dikhanov-Balk iteration is not done in 20,000 steps and says so.
TEST(IkleDikhanovBalk, SaysItDidNotConvergeRatherThanReturnANumber) {
  EXPECT_TRUE(Solve(WeaklyLinked(1e-6), "geary-khamis").failure.empty());
  const AggregateParities result = Solve(WeaklyLinked(1e-6), "ikle-dikhanov-balk");
  EXPECT_TRUE(StartsWith(result.failure,
                         "ikle-dikhanov-balk did not converge: the largest change of a ln parity "
                         "was "))
      << result.failure;
  EXPECT_TRUE(result.failure.find(" after 20000 iterations (the test is 1e-12); regions linked "
                                  "through few shared headings converge slowly") !=
              std::string::npos)
      << result.failure;
  EXPECT_TRUE(result.log_parity.array().isNaN().all());
}

}  // namespace
}  // namespace paritas
