// The items-needed table: its formulas on hand-made standard errors, and the
// plan checked by simulation (price the items it asks for, measure the
// standard error reached).
#include "paritas/uncertainty/items_needed.h"

#include <cmath>
#include <string>

#include <gtest/gtest.h>

#include "items_needed_sim.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey_loader.h"
#include "synthetic_survey.h"
#include "test_util.h"

namespace paritas {
namespace {

using testing::MakeTempDir;

// 3 regions, 2 headings in 2 groups (nodes all, g01, h001, g02, h002).
Survey TwoHeadingSurvey() {
  synthetic::SyntheticOptions options;
  options.num_regions = 3;
  options.num_headings = 2;
  options.items_per_heading = 4;
  options.coverage = 1.0;
  options.num_groups = 2;
  const std::string folder = MakeTempDir("items-needed-hand");
  std::string error;
  EXPECT_TRUE(synthetic::WriteSurvey(synthetic::Generate(options), folder, &error)) << error;
  RunConfig config;
  EXPECT_TRUE(LoadRunConfig(folder + "/config.yaml", &config, &error)) << error;
  Survey survey;
  LoadSummary summary;
  EXPECT_TRUE(LoadSurvey(config, LoadOptions(), &survey, &summary)) << summary.message;
  return survey;
}

const ItemsNeededRow* Row(const Survey& survey, const std::vector<ItemsNeededRow>& rows,
                          const std::string& code) {
  for (const ItemsNeededRow& row : rows) {
    if (survey.classification.nodes()[row.node].code == code) return &row;
  }
  return nullptr;
}

// Hand computation: standard errors 0, 0.02, 0.04 in every node (0 = left
// out, as for a reference region), target 0.01. Median 0.03 -> c = 9, worst
// 0.04 -> c = 16. h001 has 8 items: 72 and 128; h002 has 4: 36 and 64; the
// root and its groups average their headings (root 6 items: 54 and 96).
// Coverage 50 % keeps 4 of 8 and 2 of 4 items (n/m - 1 = 1), 25 % keeps 2 and
// 1 (n/m - 1 = 3), 100 % leaves none out (factor 0, ignored); sds SE, SE x
// sqrt(3) and 0 give the fitted variance (SE^2 x 1 + 3 SE^2 x 3) / (1 + 9) =
// SE^2, so the curve's standard error equals the bootstrap's.
TEST(ItemsNeeded, FactorsItemsAndCurveFollowTheHandComputation) {
  const Survey survey = TwoHeadingSurvey();
  const int num_nodes = static_cast<int>(survey.classification.nodes().size());
  ASSERT_EQ(num_nodes, 5);
  SensitivityResult result;
  result.heading_num_items = {8, 4};
  result.heading_external = {0, 0};
  result.boot_log_se.resize(num_nodes, 3);
  for (int n = 0; n < num_nodes; ++n) result.boot_log_se.row(n) << 0.0, 0.02, 0.04;
  for (double share : {0.5, 0.25, 1.0}) {
    CoverageLevel level;
    level.coverage = share;
    const double scale = share == 0.5 ? 1.0 : (share == 0.25 ? std::sqrt(3.0) : 0.0);
    level.log_sd = result.boot_log_se * scale;
    result.coverage.push_back(level);
  }
  const std::vector<ItemsNeededRow> rows = ItemsNeeded(survey, result, 0.01);
  ASSERT_EQ(rows.size(), 5u);
  EXPECT_EQ(survey.classification.nodes()[rows[0].node].code, "all");
  const struct {
    const char* code;
    double items_now;
    int for_median, for_all;
  } expected[] = {{"all", 6, 54, 96}, {"g01", 8, 72, 128}, {"g02", 4, 36, 64},
                  {"h001", 8, 72, 128}, {"h002", 4, 36, 64}};
  for (const auto& e : expected) {
    const ItemsNeededRow* row = Row(survey, rows, e.code);
    ASSERT_NE(row, nullptr) << e.code;
    EXPECT_EQ(row->num_regions, 2) << e.code;
    EXPECT_DOUBLE_EQ(row->items_now, e.items_now) << e.code;
    EXPECT_NEAR(row->log_se_median, 0.03, 1e-15) << e.code;
    EXPECT_NEAR(row->factor_median, 9.0, 1e-12) << e.code;
    EXPECT_NEAR(row->factor_all, 16.0, 1e-12) << e.code;
    EXPECT_EQ(row->items_for_median, e.for_median) << e.code;
    EXPECT_EQ(row->items_for_all, e.for_all) << e.code;
    EXPECT_EQ(row->num_regions_at_target, 0) << e.code;
    EXPECT_NEAR(row->curve_log_se_median, 0.03, 1e-12) << e.code;
    EXPECT_NEAR(row->curve_ratio_median, 1.0, 1e-12) << e.code;
  }
  // A looser target: 0.02 is met by one region, and the median needs 9/4 x.
  const ItemsNeededRow* h001 = Row(survey, ItemsNeeded(survey, result, 0.02), "h001");
  EXPECT_EQ(h001->num_regions_at_target, 1);
  EXPECT_EQ(h001->items_for_median, 18);
  const std::string csv = ItemsNeededCsv(survey, rows, 0.01);
  EXPECT_EQ(csv.substr(0, csv.find('\n')),
            "node,kind,num_headings,num_headings_external,items_now,num_regions,log_se_median,"
            "log_se_max,curve_log_se_median,curve_ratio_median,target_log_se,factor_median,"
            "factor_all,items_for_median,items_for_all,num_regions_at_target");
  EXPECT_NE(csv.find("\nh002,heading,1,0,4,2,0.03,0.04,"), std::string::npos) << csv;
}

TEST(ItemsNeeded, TargetOutOfRangeIsRejected) {
  SensitivityOptions options;
  options.target_log_se = 0.0;
  std::string error;
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error,
            "target standard error must be above 0 and below 1 (log points, e.g. 0.01), found "
            "0.000000");
}

// The check the table exists for: a 30-region survey with 8 items per
// heading plans for half its root standard error (about 4 x the items);
// pricing that many items from a pool of 400 per heading, 100 times over,
// the spread of the parities must match the 1/n law's prediction. Monte
// Carlo error of a median-over-regions sd from 100 surveys: a few per cent.
TEST(ItemsNeeded, SimulatedSurveysReachThePlannedStandardError) {
  synthetic::ItemsNeededSimOptions options;
  options.num_threads = 2;
  synthetic::ItemsNeededSimResult result;
  std::string error;
  ASSERT_TRUE(synthetic::SimulateItemsNeeded(options, &result, &error)) << error;
  ASSERT_FALSE(result.rows.empty());
  EXPECT_GE(result.items_priced, 28);
  EXPECT_LE(result.items_priced, 36);
  const auto& root = result.rows.front();
  EXPECT_EQ(root.node, "all");
  EXPECT_LE(root.log_se_predicted, result.target_log_se * (1 + 1e-12));
  EXPECT_LE(root.log_se_reached, 1.15 * result.target_log_se);
  double sum_ratio = 0.0;
  int num_headings = 0;
  for (const auto& row : result.rows) {
    const double ratio = row.log_se_reached / row.log_se_predicted;
    if (row.is_heading) {
      sum_ratio += ratio;
      ++num_headings;
    } else {
      EXPECT_GT(ratio, 0.85) << row.node;
      EXPECT_LT(ratio, 1.2) << row.node;
    }
  }
  ASSERT_EQ(num_headings, options.num_headings);
  EXPECT_GT(sum_ratio / num_headings, 0.9);
  EXPECT_LT(sum_ratio / num_headings, 1.15);
}

}  // namespace
}  // namespace paritas
