// The items-needed table: its formulas on hand-made standard errors, and the
// plan checked by simulation (price the items it asks for, measure the
// standard error reached).
#include "paritas/uncertainty/items_needed.h"

#include <cmath>
#include <cstdint>
#include <string>
#include <utility>

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
  const std::vector<ItemsNeededRow> looser = ItemsNeeded(survey, result, 0.02);
  const ItemsNeededRow* h001 = Row(survey, looser, "h001");
  EXPECT_EQ(h001->num_regions_at_target, 1);
  EXPECT_EQ(h001->items_for_median, 18);
  const std::string csv = ItemsNeededCsv(survey, rows, 0.01);
  EXPECT_EQ(csv.substr(0, csv.find('\n')),
            "node,kind,num_headings,num_headings_external,items_now,num_regions,log_se_median,"
            "log_se_max,curve_log_se_median,curve_ratio_median,target_log_se,factor_median,"
            "factor_all,items_for_median,items_for_all,num_regions_at_target");
  EXPECT_NE(csv.find("\nh002,heading,1,0,4,2,0.03,0.04,"), std::string::npos) << csv;
}

// Standard errors 0, se and 2 se in every node of TwoHeadingSurvey (no
// coverage curve): median 1.5 se, worst 2 se.
SensitivityResult HandMadeStandardErrors(const Survey& survey, double se) {
  SensitivityResult result;
  result.heading_num_items = {8, 4};
  result.heading_external = {0, 0};
  result.boot_log_se.resize(static_cast<int>(survey.classification.nodes().size()), 3);
  for (int n = 0; n < result.boot_log_se.rows(); ++n) result.boot_log_se.row(n) << 0.0, se, 2 * se;
  return result;
}

// Median 0.03 and worst 0.04 against 1e-6 give c = 9e8 and 1.6e9: h001's 8
// items become 7.2e9 and 1.28e10, past the 2^31 an int holds.
TEST(ItemsNeeded, CountsPastTheRangeOfAnIntAreExact) {
  const Survey survey = TwoHeadingSurvey();
  const std::vector<ItemsNeededRow> rows =
      ItemsNeeded(survey, HandMadeStandardErrors(survey, 0.02), 1e-6);
  const ItemsNeededRow* h001 = Row(survey, rows, "h001");
  ASSERT_NE(h001, nullptr);
  EXPECT_EQ(h001->items_for_median, int64_t{7'200'000'000});
  EXPECT_EQ(h001->items_for_all, int64_t{12'800'000'000});
  EXPECT_EQ(Row(survey, rows, "all")->items_for_median, int64_t{5'400'000'000});
}

// The target as given: four places when they show it exactly, else its
// shortest digits (0.99999 was shown as 1.0000).
TEST(ItemsNeeded, TheSummaryShowsTheTargetAsGiven) {
  const Survey survey = TwoHeadingSurvey();
  const auto shown = [&](double target) {
    const std::string summary =
        ItemsNeededSummary(survey, ItemsNeeded(survey, HandMadeStandardErrors(survey, 0.2), target), target);
    const std::string prefix = "items per heading for a standard error of ln parity of ";
    EXPECT_EQ(summary.substr(0, prefix.size()), prefix);
    return summary.substr(prefix.size(), summary.find(" (") - prefix.size());
  };
  EXPECT_EQ(shown(0.05), "0.0500");
  EXPECT_EQ(shown(0.99999), "0.99999");
  EXPECT_EQ(shown(0.12345), "0.12345");
  EXPECT_EQ(shown(0.00002), "2e-05");
}

// Median 0.3 and worst 0.4 against 1e-6: c = 9e10 and 1.6e11, so h001 and
// g01 (8 items) need 7.2e11 for the median region but 1.28e12 for every
// region, past the ceiling of 10^12; g02 (4 items) stays below it.
TEST(ItemsNeeded, CountsPastTheCeilingAreLeftEmptyAndSaidOnTheTerminal) {
  const Survey survey = TwoHeadingSurvey();
  const std::vector<ItemsNeededRow> rows =
      ItemsNeeded(survey, HandMadeStandardErrors(survey, 0.2), 1e-6);
  const std::string csv = ItemsNeededCsv(survey, rows, 1e-6);
  const size_t h001 = csv.find("\nh001,");
  ASSERT_NE(h001, std::string::npos) << csv;
  const std::string line = csv.substr(h001 + 1, csv.find('\n', h001 + 1) - h001 - 1);
  EXPECT_EQ(line.substr(line.rfind(",720000000000,")), ",720000000000,,0") << line;
  EXPECT_NE(csv.find(",360000000000,640000000000,0\n"), std::string::npos) << csv;
  const std::string summary = ItemsNeededSummary(survey, rows, 1e-6);
  EXPECT_EQ(summary.substr(0, summary.find(" (")),
            "items per heading for a standard error of ln parity of 1e-06");
  EXPECT_NE(summary.find("  h001: 8.0 items now, se 0.3000 (median region) -> 720000000000 for "
                         "the median region, over 10^12 for every region\n"),
            std::string::npos)
      << summary;
  EXPECT_NE(summary.find("  2 nodes need over 10^12 items per heading, more than any heading "
                         "has: items_needed.csv leaves those counts empty (factor_median and "
                         "factor_all give the scale)\n"),
            std::string::npos)
      << summary;
}

// Below 1e-6 the factor (SE / target)^2 could overflow; 1e-300 made it inf.
TEST(ItemsNeeded, TargetOutOfRangeIsRejected) {
  for (const auto& [target, found] : {std::pair{0.0, "0"}, {1e-7, "1e-07"}, {1e-300, "1e-300"},
                                      {1.0, "1"}}) {
    SensitivityOptions options;
    options.target_log_se = target;
    std::string error;
    EXPECT_FALSE(options.IsValid(&error)) << found;
    EXPECT_EQ(error, std::string("target standard error must be at least 0.000001 and below 1 (log "
                                 "points, e.g. 0.01), found ") +
                         found);
  }
  SensitivityOptions smallest;
  smallest.target_log_se = kMinTargetLogSe;
  std::string error;
  EXPECT_TRUE(smallest.IsValid(&error)) << error;
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
