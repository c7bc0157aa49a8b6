// The method registries are the only lists of methods: these tests check that
// every registered method is reachable by name and runs through the whole
// chain, and that the parts which list methods (configuration messages,
// method spread) follow the registries.
#include <cmath>
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
