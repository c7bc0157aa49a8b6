// The method registries are the only lists of methods: these tests check that
// every registered method is reachable by name and runs through the whole
// chain, and that the parts which list methods (configuration messages,
// method spread) follow the registries.
#include <bit>
#include <cmath>
#include <cstdint>
#include <set>
#include <string>

#include <gtest/gtest.h>

#include "paritas/aggregation/aggregation_method.h"
#include "paritas/base/text.h"
#include "paritas/compute/compute.h"
#include "paritas/elementary/elementary_method.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey_loader.h"
#include "paritas/uncertainty/sensitivity.h"
#include "synthetic_survey.h"
#include "test_util.h"

namespace paritas {
namespace {

// Equal bits (NaN included).
bool SameBits(double x, double y) {
  return std::bit_cast<uint64_t>(x) == std::bit_cast<uint64_t>(y);
}

Survey SmallSurvey(const std::string& name) {
  synthetic::SyntheticOptions options;
  options.num_regions = 8;
  options.num_headings = 4;
  options.items_per_heading = 6;
  options.coverage = 0.8;
  options.num_groups = 2;
  options.seed = 11;
  const std::string folder = testing::MakeTempDir(name);
  std::string error;
  EXPECT_TRUE(synthetic::WriteSurvey(synthetic::Generate(options), folder, &error)) << error;
  RunConfig config;
  EXPECT_TRUE(LoadRunConfig(folder + "/config.yaml", &config, &error)) << error;
  Survey survey;
  LoadSummary summary;
  EXPECT_TRUE(LoadSurvey(config, LoadOptions(), &survey, &summary)) << summary.message;
  return survey;
}

TEST(ElementaryRegistry, FindsEveryMethodByItsNameInAnyCase) {
  std::set<std::string> seen;
  for (const ElementaryMethod* method : ElementaryMethods()) {
    const std::string name(method->Name());
    EXPECT_TRUE(seen.insert(name).second) << "registered twice: " << name;
    EXPECT_EQ(FindElementaryMethod(name), method);
    EXPECT_EQ(FindElementaryMethod(" " + ToLower(name) + " "), method);
    std::string upper = name;
    for (char& c : upper) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
    EXPECT_EQ(FindElementaryMethod(upper), method);
    EXPECT_FALSE(method->Description().empty()) << name;
    EXPECT_FALSE(method->ReportHtml().empty()) << name;
  }
  EXPECT_EQ(FindElementaryMethod("jevons"), nullptr);
  EXPECT_EQ(ElementaryMethodNames().size(), ElementaryMethods().size());
}

TEST(AggregationRegistry, FindsEveryMethodByItsNameInAnyCase) {
  std::set<std::string> seen;
  for (const AggregationMethod* method : AggregationMethods()) {
    const std::string name(method->Name());
    EXPECT_TRUE(seen.insert(name).second) << "registered twice: " << name;
    EXPECT_EQ(FindAggregationMethod(name), method);
    EXPECT_EQ(FindAggregationMethod("\t" + name), method);
    EXPECT_FALSE(method->Description().empty()) << name;
    EXPECT_FALSE(method->ReportHtml().empty()) << name;
  }
  EXPECT_EQ(FindAggregationMethod("fisher"), nullptr);
  EXPECT_EQ(AggregationMethodNames().size(), AggregationMethods().size());
}

TEST(MethodRegistry, EveryCombinationGivesEveryRegionAParityAtTheRoot) {
  const Survey survey = SmallSurvey("registry_all");
  for (const std::string& elementary : ElementaryMethodNames()) {
    for (const std::string& aggregation : AggregationMethodNames()) {
      ComputeOptions options;
      options.elementary.method = elementary;
      options.aggregation = aggregation;
      ParityResult result;
      ComputeSummary summary;
      ASSERT_TRUE(ComputeParities(survey, options, &result, &summary)) << elementary << "/" << aggregation;
      const Eigen::VectorXd& root = result.nodes.front().parity;
      for (int r = 0; r < survey.num_regions(); ++r) {
        EXPECT_TRUE(std::isfinite(root(r)) && root(r) > 0) << elementary << "/" << aggregation << " region " << r;
      }
      // Reference "mean": the geometric mean of the root parities is 100.
      EXPECT_NEAR(root.array().log().mean(), std::log(100.0), 1e-12);
    }
  }
}

// ElementaryOptions::keep_cell_fitted false (as compute and check run)
// leaves cell_fitted empty and changes no other bit; kept, the fitted values
// and the residuals add up to the cells' ln prices (the definition of a
// residual, e = ln p - fitted; common practice).
TEST(ElementaryRegistry, CellFittedIsKeptOnlyWhenAskedAndNothingElseChanges) {
  const Survey survey = SmallSurvey("registry_fitted");
  int num_methods_with_residuals = 0;
  for (const ElementaryMethod* method : ElementaryMethods()) {
    const std::string name(method->Name());
    ComputeOptions options;
    options.elementary.method = name;
    ParityResult kept, left;
    ComputeSummary summary;
    ASSERT_TRUE(ComputeParities(survey, options, &kept, &summary)) << name;
    options.elementary.keep_cell_fitted = false;
    ASSERT_TRUE(ComputeParities(survey, options, &left, &summary)) << name;
    const bool gives = method->Properties().gives_cell_residuals;
    num_methods_with_residuals += gives ? 1 : 0;
    ASSERT_EQ(kept.headings.size(), left.headings.size());
    for (size_t h = 0; h < kept.headings.size(); ++h) {
      const HeadingParities &a = kept.headings[h], &b = left.headings[h];
      SCOPED_TRACE(name + ", heading " + std::to_string(h));
      EXPECT_EQ(a.cell_fitted.size(), gives ? a.cell_residual.size() : 0);
      EXPECT_EQ(b.cell_fitted.size(), 0);
      ASSERT_EQ(a.cell_residual.size(), b.cell_residual.size());
      EXPECT_TRUE(a.cell_residual == b.cell_residual);
      for (Eigen::Index r = 0; r < a.log_parity.size(); ++r) {
        EXPECT_TRUE(SameBits(a.log_parity[r], b.log_parity[r])) << "region " << r;
      }
      const HeadingRange& range = survey.heading_range[a.heading];
      for (Eigen::Index k = 0; k < a.cell_fitted.size(); ++k) {
        const double log_price = survey.cells.log_price[range.cell_begin + k];
        EXPECT_NEAR(a.cell_fitted[k] + a.cell_residual[k], log_price, 1e-12);
      }
    }
    for (int r = 0; r < survey.num_regions(); ++r) {
      EXPECT_TRUE(SameBits(kept.nodes.front().parity(r), left.nodes.front().parity(r))) << name;
    }
  }
  EXPECT_GE(num_methods_with_residuals, 2);  // cpd, robust-cpd, cprd
}

TEST(MethodRegistry, UnknownNamesAreRefusedWithTheRegisteredNames) {
  ComputeOptions options;
  options.elementary.method = "median";
  std::string error;
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "elementary method 'median' is not one of: " + JoinNames(ElementaryMethodNames()));
  options = ComputeOptions();
  options.aggregation = "walsh";
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "aggregation method 'walsh' is not one of: " + JoinNames(AggregationMethodNames()));
}

TEST(MethodRegistry, MethodSpreadRunsEveryRegisteredCombination) {
  const Survey survey = SmallSurvey("registry_spread");
  SensitivityOptions options;
  options.run_bootstrap = false;
  options.run_leave_one_out = false;
  options.run_coverage = false;
  SensitivityResult result;
  SensitivitySummary summary;
  ASSERT_TRUE(RunSensitivity(survey, ComputeOptions(), options, &result, &summary)) << summary.message;
  std::set<std::string> runs;
  for (const MethodRun& run : result.methods) runs.insert(run.name);
  std::set<std::string> expected;
  for (const std::string& e : ElementaryMethodNames()) {
    for (const std::string& a : AggregationMethodNames()) expected.insert(e + "/" + a);
  }
  EXPECT_EQ(runs, expected);
}

}  // namespace
}  // namespace paritas
