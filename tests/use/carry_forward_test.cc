// The arithmetic of carrying heading parities (use/carry_forward.h) on
// numbers written out here, and the exact messages for bad index files.
#include "paritas/use/carry_forward.h"

#include <gtest/gtest.h>

#include <cmath>
#include <string>

#include "test_util.h"

namespace paritas {
namespace {

using testing::MakeTempDir;
using testing::WriteTextFile;

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// all: {food: [bread, meat], rent}; groups are not used here.
Classification Tree() {
  Classification tree;
  std::string error;
  EXPECT_TRUE(Classification::FromYaml("all:\n  - food: [bread, meat]\n  - rent\n", "tree",
                                       &tree, &error))
      << error;
  return tree;
}

const std::vector<std::string> kRegions = {"nor", "sou"};

bool Read(const std::string& text, const std::string& period, PriceIndexTable* table,
          std::string* error, std::string* path) {
  *path = MakeTempDir("carry_indices") + "/indices.csv";
  WriteTextFile(*path, text);
  return ReadPriceIndices(*path, ReadLimits(), Tree(), kRegions, period, table, error);
}

TEST(PriceIndices, TheMostSpecificNodeWinsAndAnAggregateCoversItsHeadings) {
  PriceIndexTable table;
  std::string error, path;
  ASSERT_TRUE(Read(
      "region,node,period,index\nnor,all,2026,103\nnor,meat,2026,110\nsou,food,2026,105\n"
      "sou,all,2025,99\n",
      "2026", &table, &error, &path))
      << error;
  const Classification tree = Tree();
  const int bread = tree.FindHeading("bread"), meat = tree.FindHeading("meat"),
            rent = tree.FindHeading("rent");
  EXPECT_EQ(table.index(0, bread), 103);  // nor: from all
  EXPECT_EQ(table.index(0, meat), 110);   // nor: its own row beats all's
  EXPECT_EQ(table.index(0, rent), 103);
  EXPECT_EQ(table.index(1, bread), 105);  // sou: from food
  EXPECT_EQ(table.index(1, meat), 105);
  EXPECT_TRUE(std::isnan(table.index(1, rent)));  // sou has no row above rent in 2026
  EXPECT_EQ(table.from_node(0, meat), tree.FindNode("meat"));
  EXPECT_EQ(table.from_node(1, rent), -1);
  EXPECT_EQ(table.num_rows_read, 4);
  EXPECT_EQ(table.num_rows_used, 3);
  EXPECT_EQ(table.num_rows_other_period, 1);
}

TEST(PriceIndices, BadFilesAreRefusedWithFileLineAndColumn) {
  struct Case {
    std::string text, period, message;
  };
  const std::vector<Case> cases = {
      {"region,node,period,index\nnor,food,2026,-3\n", "",
       ":2:4: index '-3' is not positive"},
      // An index of 1e200 was taken and made the run stop with a wrong
      // "not linked" message.
      {"region,node,period,index\nnor,food,2026,1e200\n", "",
       ":2:4: index '1e200' is beyond 1e30, where ratios between regions and their products overflow or lose digits; only ratios "
       "between regions matter, so rescale them"},
      {"region,node,period,index\nnor,food,2026,abc\n", "",
       ":2:4: index 'abc' is not a number"},
      {"region,node,period,index\nnor,food,2026,\n", "", ":2:4: index is empty"},
      {"region,node,period,index\nnorr,food,2026,101\n", "",
       ":2:1: region 'norr' is not in the benchmark run; did you mean 'nor'?"},
      {"region,node,period,index\nnor,fod,2026,101\n", "",
       ":2:2: node 'fod' is not a basic heading or aggregate of the classification; did you "
       "mean 'food'?"},
      {"region,node,period,index\nnor,food,,101\n", "", ":2:3: period is empty"},
      {"region,node,period,index\nnor,food,2026,101\nsou,food,2026,102\nnor,food,2026,103\n", "",
       ":4:1: region 'nor', node 'food' and period '2026' repeat line 2"},
      {"region,node,index\nnor,food,101\n", "",
       ":1: missing column 'period' (found: region, node, index)"},
      {"region,node,period,index\nnor,food,2025,101\nnor,food,2026,102\n", "",
       " holds 2 periods (2025, 2026); choose one with --period"},
      {"region,node,period,index\nnor,food,2025,101\n", "2027",
       ": no rows for period '2027' (periods found: 2025)"},
      {"region,node,period,index\n", "", ": no data rows (only a header)"},
  };
  for (const Case& c : cases) {
    PriceIndexTable table;
    std::string error, path;
    EXPECT_FALSE(Read(c.text, c.period, &table, &error, &path)) << c.text;
    EXPECT_EQ(error, path + c.message) << c.text;
  }
}

// Hand computation: two regions, one heading; benchmark parities 80 and 125
// (ln), indices 110 and 121, weights 60 and 40. ln C = (60 ln 110 + 40 ln
// 121) / 100 = ln 100 + 1.4 ln 1.1, so C = 100 x 1.1^1.4; carried ln p =
// ln p0 + ln I - ln C.
TEST(CarryHeadingParities, MovesEachRegionByItsIndexRelativeToTheCountrys) {
  Eigen::MatrixXd log_parity(2, 1), index(2, 1), weights(2, 1);
  log_parity << std::log(80.0), std::log(125.0);
  index << 110, 121;
  weights << 60, 40;
  CarriedHeadings carried;
  std::string error;
  ASSERT_TRUE(CarryHeadingParities(log_parity, index, weights, MissingIndexRule::kStop, kRegions,
                                   {"rent"}, &carried, &error))
      << error;
  const double country = 100.0 * std::pow(1.1, 1.4);
  PARITAS_EXPECT_CLOSE(carried.country_index(0), country, 1e-14);
  PARITAS_EXPECT_CLOSE(std::exp(carried.log_parity(0, 0)), 80.0 * 110.0 / country, 1e-14);
  PARITAS_EXPECT_CLOSE(std::exp(carried.log_parity(1, 0)), 125.0 * 121.0 / country, 1e-14);
  // The ratio between regions moves by the ratio of their indices only.
  PARITAS_EXPECT_CLOSE(std::exp(carried.log_parity(1, 0) - carried.log_parity(0, 0)),
                       125.0 / 80.0 * 1.1, 1e-14);
}

TEST(CarryHeadingParities, AMissingIndexStopsUnlessMovedAsTheCountry) {
  Eigen::MatrixXd log_parity(2, 2), index(2, 2), weights(2, 2);
  log_parity << 0.0, 0.0, 0.1, kNaN;  // sou has no benchmark parity in rent
  index << 104, kNaN, 102, kNaN;      // nor has no index for rent
  weights << 1, 1, 1, 1;
  CarriedHeadings carried;
  std::string error;
  EXPECT_FALSE(CarryHeadingParities(log_parity, index, weights, MissingIndexRule::kStop, kRegions,
                                    {"food", "rent"}, &carried, &error));
  EXPECT_EQ(error,
            "no price index for region 'nor' in heading 'rent' (nor for any aggregate above it), "
            "where the benchmark has a parity; give the indices, or --missing-index country to "
            "move them as the country does");
  // Under rule country nobody has an index in rent: its movement is unknown.
  EXPECT_FALSE(CarryHeadingParities(log_parity, index, weights, MissingIndexRule::kCountry,
                                    kRegions, {"food", "rent"}, &carried, &error));
  EXPECT_EQ(error,
            "no region has a price index for heading 'rent' (nor for any aggregate above it), so "
            "the country's movement there is unknown");
  // With sou priced in rent and indexed, nor moves as the country: unchanged relative parity.
  log_parity(1, 1) = 0.2;
  index(1, 1) = 108;
  ASSERT_TRUE(CarryHeadingParities(log_parity, index, weights, MissingIndexRule::kCountry,
                                   kRegions, {"food", "rent"}, &carried, &error))
      << error;
  ASSERT_EQ(carried.filled_by_rule.size(), 1u);
  EXPECT_EQ(carried.filled_by_rule[0], std::make_pair(0, 1));
  PARITAS_EXPECT_CLOSE(carried.country_index(1), 108.0, 1e-14);
  PARITAS_EXPECT_CLOSE(carried.log_parity(1, 1) - carried.log_parity(0, 1), 0.2, 1e-14);
}

// A carried parity must stay within 1e-60 to 1e60, where the aggregation's
// products of ratios between regions stay finite (CarryCommand.
// EveryMethodAggregatesParitiesAtTheEdgeOfTheCarriedRange). Equal weights:
// the country's index is sqrt(1000 x 1) = 31.62..., so nor moves by
// 1000 / 31.62 = 31.62.
TEST(CarryHeadingParities, AParityCarriedBeyondTheRangeStopsWithItsFigures) {
  Eigen::MatrixXd log_parity(2, 1), index(2, 1), weights(2, 1);
  log_parity << std::log(1e59), 0.0;
  index << 1000, 1;
  weights << 1, 1;
  CarriedHeadings carried;
  std::string error;
  EXPECT_FALSE(CarryHeadingParities(log_parity, index, weights, MissingIndexRule::kStop, kRegions,
                                    {"rent"}, &carried, &error));
  EXPECT_EQ(error,
            "region 'nor', heading 'rent': the carried parity 3.16e+60 (the benchmark's 1e+59 "
            "times the index 1000.00 over the country's 31.62) is beyond 1e60, where ratios "
            "between regions overflow in the aggregation; check the benchmark's parities.csv and "
            "the units of the index file");
  // Within the range (the same benchmark, equal indices) it is carried.
  index << 1000, 1000;
  EXPECT_TRUE(CarryHeadingParities(log_parity, index, weights, MissingIndexRule::kStop, kRegions,
                                   {"rent"}, &carried, &error))
      << error;
  // And at the small end: sou, at 1 / 31.62 of 1e-59.
  log_parity << 0.0, std::log(1e-59);
  index << 1000, 1;
  EXPECT_FALSE(CarryHeadingParities(log_parity, index, weights, MissingIndexRule::kStop, kRegions,
                                    {"rent"}, &carried, &error));
  EXPECT_EQ(error,
            "region 'sou', heading 'rent': the carried parity 3.16e-61 (the benchmark's 1e-59 "
            "times the index 1.00 over the country's 31.62) is nearer 0 than 1e-60, where ratios "
            "between regions overflow in the aggregation; check the benchmark's parities.csv and "
            "the units of the index file");
}

TEST(MissingIndexRule, ReadsAnyCaseAndRefusesOtherText) {
  MissingIndexRule rule = MissingIndexRule::kStop;
  EXPECT_TRUE(FromString("Country", &rule));
  EXPECT_EQ(rule, MissingIndexRule::kCountry);
  EXPECT_EQ(ToString(rule), "country");
  EXPECT_FALSE(FromString("guess", &rule));
}

}  // namespace
}  // namespace paritas
