// Heading contributions: they sum to every region's ln parity at every node
// under every method and reference; under geks-tornqvist with complete data
// and reference mean the price parts alone sum to it (GEKS-Törnqvist is the
// geometric mean of the bilateral Törnqvist indices against every region:
// Gini 1931; Eltetö and Köves 1964; Szulc 1964); against a region the price
// parts are pair's Törnqvist terms.
#include "paritas/use/heading_contributions.h"

#include <gtest/gtest.h>
#include <omp.h>

#include <cmath>
#include <fstream>
#include <map>
#include <sstream>
#include <string>
#include <vector>

#include "paritas/aggregation/aggregation_method.h"
#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "paritas/output/output_writers.h"
#include "paritas/output/report.h"
#include "paritas/survey/survey_loader.h"
#include "paritas/use/pair_comparison.h"
#include "test_util.h"

namespace paritas {
namespace {

using ::paritas::testing::CountOf;
using ::paritas::testing::MakeTempDir;
using ::paritas::testing::SourcePath;
using ::paritas::testing::TestDataPath;
using ::paritas::testing::WriteTextFile;

struct Computed {
  RunConfig config;
  Survey survey;
  ParityResult result;
};

void LoadAndCompute(const std::string& config_path, const std::string& aggregation,
                    const std::string& reference, Computed* out) {
  std::string error;
  ASSERT_TRUE(LoadRunConfig(config_path, &out->config, &error)) << error;
  if (!aggregation.empty()) out->config.aggregation = aggregation;
  if (!reference.empty()) out->config.reference = Reference::FromString(reference);
  LoadSummary load;
  ASSERT_TRUE(LoadSurvey(out->config, LoadOptions(), &out->survey, &load)) << load.message;
  ComputeSummary compute;
  ASSERT_TRUE(
      ComputeParities(out->survey, ComputeOptions::FromConfig(out->config), &out->result, &compute))
      << compute.message;
}

// The six-commodity data (test_util.h) as five regions in two aggregates.
std::string WriteSixCommoditySurvey() {
  return testing::WriteSixCommoditySurvey("contributions_six_commodity",
                                          "  all:\n    - g1: [c1, c2, c3]\n    - g2: [c4, c5, c6]\n");
}

// Every node and every region with a parity: the contributions sum to
// ln(parity / 100) to 1e-12.
void ExpectSumsToLnParity(const Computed& c, const ContributionTable& table) {
  std::map<std::pair<int, int>, double> sums;
  for (const RegionContributions& row : table.rows) {
    double sum = 0.0;
    for (const HeadingContribution& h : row.headings) sum += h.log_contribution;
    sums[{row.node, row.region}] = sum;
  }
  int checked = 0;
  for (int n = 0; n < static_cast<int>(c.result.nodes.size()); ++n) {
    for (int r = 0; r < c.survey.num_regions(); ++r) {
      const double p = c.result.nodes[n].parity(r);
      if (!std::isfinite(p)) continue;
      const auto it = sums.find({n, r});
      ASSERT_NE(it, sums.end()) << "node " << n << " region " << r;
      EXPECT_NEAR(it->second, std::log(p / 100.0), 1e-12) << "node " << n << " region " << r;
      ++checked;
    }
  }
  EXPECT_GT(checked, c.survey.num_regions());
}

class EveryMethodAndReference
    : public ::testing::TestWithParam<std::tuple<std::string, std::string>> {};

TEST_P(EveryMethodAndReference, ContributionsSumToEveryRegionsLnParityAtEveryNode) {
  const auto& [method, reference] = GetParam();
  Computed c;
  LoadAndCompute(SourcePath("config/demo.yaml"), method, reference, &c);
  const ContributionTable table = HeadingContributions(c.survey, c.result, c.config.reference);
  ExpectSumsToLnParity(c, table);
}

INSTANTIATE_TEST_SUITE_P(
    Demo, EveryMethodAndReference,
    ::testing::Combine(::testing::ValuesIn(AggregationMethodNames()),
                       ::testing::Values("mean", "cap", "country")),
    [](const ::testing::TestParamInfo<std::tuple<std::string, std::string>>& param_info) {
      std::string name = std::get<0>(param_info.param) + "_" + std::get<1>(param_info.param);
      for (char& ch : name) ch = std::isalnum(static_cast<unsigned char>(ch)) ? ch : '_';
      return name;
    });

// Nodes are split on several threads and joined in node order: one thread
// or two give the same table, rows in node order.
TEST(HeadingContributions, OneThreadOrTwoGiveTheSameRowsInNodeOrder) {
  Computed c;
  LoadAndCompute(SourcePath("config/demo.yaml"), "geks-fisher", "mean", &c);
  const int threads = omp_get_max_threads();
  omp_set_num_threads(1);
  const ContributionTable one = HeadingContributions(c.survey, c.result, c.config.reference);
  omp_set_num_threads(2);
  const ContributionTable two = HeadingContributions(c.survey, c.result, c.config.reference);
  omp_set_num_threads(threads);
  ASSERT_GT(one.rows.size(), static_cast<size_t>(c.survey.num_regions()));
  for (size_t k = 1; k < one.rows.size(); ++k) {
    ASSERT_LE(one.rows[k - 1].node, one.rows[k].node) << k;
  }
  EXPECT_EQ(ContributionsCsv(c.survey, one), ContributionsCsv(c.survey, two));
}

// The file's blocks reserve about what they hold: the root's rows hold a
// line per heading, a heading node's one, and a block of heading nodes'
// rows used to reserve for the root's (as many times too much as there are
// headings). The text is the same either way.
TEST(ContributionsCsv, BlocksReserveAboutWhatTheyHold) {
  Computed c;
  LoadAndCompute(SourcePath("config/demo.yaml"), "geks-fisher", "mean", &c);
  const ContributionTable table = HeadingContributions(c.survey, c.result, c.config.reference);
  ASSERT_GT(table.rows.front().headings.size(), 4u);
  std::string joined;
  size_t largest_ratio_block = 0;
  double largest_ratio = 0.0;
  size_t num_blocks = 0;
  ContributionsCsvBlocks(c.survey, table, [&](std::string block) {
    if (num_blocks > 0 && !block.empty()) {  // the first is the header
      const double ratio =
          static_cast<double>(block.capacity()) / static_cast<double>(block.size());
      if (ratio > largest_ratio) largest_ratio = ratio, largest_ratio_block = num_blocks;
    }
    ++num_blocks;
    joined += block;
  });
  EXPECT_GT(num_blocks, 3u);
  EXPECT_LT(largest_ratio, 4.0) << "block " << largest_ratio_block;
  EXPECT_EQ(joined, ContributionsCsv(c.survey, table));
}

TEST(HeadingContributions, GeksTornqvistOnCompleteDataNeedsNoAdjustmentAgainstTheMean) {
  Computed c;
  LoadAndCompute(WriteSixCommoditySurvey(), "geks-tornqvist", "mean", &c);
  const ContributionTable table = HeadingContributions(c.survey, c.result, c.config.reference);
  EXPECT_EQ(table.base, "the average region");
  ExpectSumsToLnParity(c, table);
  for (const RegionContributions& row : table.rows) {
    for (const HeadingContribution& h : row.headings) EXPECT_NEAR(h.adjustment, 0.0, 1e-12);
  }
}

TEST(HeadingContributions, GeksTornqvistNeedsNoAdjustmentAgainstTheMeanWithMissingHeadings) {
  // The demo misses some heading parities (e.g. housing in some regions), so
  // pairs renormalise their shares differently; the pairwise average still
  // is the GEKS-Törnqvist closed form.
  Computed c;
  LoadAndCompute(SourcePath("config/demo.yaml"), "geks-tornqvist", "mean", &c);
  const ContributionTable table = HeadingContributions(c.survey, c.result, c.config.reference);
  for (const RegionContributions& row : table.rows) {
    for (const HeadingContribution& h : row.headings) EXPECT_NEAR(h.adjustment, 0.0, 1e-12);
  }
}

TEST(HeadingContributions, GeksFisherLeavesAnAdjustmentWhichTheSumStillAbsorbs) {
  // The trick: the price parts are Törnqvist terms, so under GEKS-Fisher the
  // adjustment must be non-zero somewhere, or the test would not discriminate.
  Computed c;
  LoadAndCompute(WriteSixCommoditySurvey(), "geks-fisher", "mean", &c);
  const ContributionTable table = HeadingContributions(c.survey, c.result, c.config.reference);
  ExpectSumsToLnParity(c, table);
  double largest = 0.0;
  for (const RegionContributions& row : table.rows) {
    for (const HeadingContribution& h : row.headings)
      largest = std::max(largest, std::abs(h.adjustment));
  }
  EXPECT_GT(largest, 1e-6);
}

TEST(HeadingContributions, AgainstARegionThePricePartsArePairsTornqvistTerms) {
  Computed c;
  LoadAndCompute(WriteSixCommoditySurvey(), "geks-fisher", "s1", &c);
  const ContributionTable table = HeadingContributions(c.survey, c.result, c.config.reference);
  EXPECT_EQ(table.base, "region 's1'");
  int compared = 0;
  for (const RegionContributions& row : table.rows) {
    if (row.node != 0) continue;
    PairComparison pair;
    std::string error;
    ASSERT_TRUE(ComparePair(c.survey, c.result, "s1",
                            std::string(c.survey.regions.Code(row.region)), "", &pair, &error))
        << error;
    std::map<std::string, double> expected;
    for (const PairContribution& p : pair.contributions) expected[p.code] = p.log_contribution;
    ASSERT_EQ(row.headings.size(), expected.size());
    double price_total = 0.0;
    for (const HeadingContribution& h : row.headings) {
      EXPECT_NEAR(h.price_part, expected.at(c.survey.heading_codes[h.heading]), 1e-14);
      price_total += h.price_part;
    }
    // The price parts sum to ln Törnqvist of the pair.
    EXPECT_NEAR(price_total, std::log(pair.tornqvist), 1e-12);
    ++compared;
  }
  EXPECT_EQ(compared, 5);
}

TEST(HeadingContributions, TwoRegionsAgainstTheMeanByHand) {
  // Two regions, two headings, one item each; expenditure a: 30, 70; b: 60,
  // 40; price ratios b/a: 2 and 1. Against the mean (computed here): the
  // heading parities are exp(±½ ln 2) and 1, shares a (0.3, 0.7), b (0.6,
  // 0.4); price part of c1 for a = mean over s of ½ (s_a + s_s)(l_a - l_s)
  // = ½ [0 + ½ (0.3 + 0.6)(-ln 2)] = -0.225 ln 2; of c2: 0.
  const std::string dir = MakeTempDir("contributions_by_hand");
  WriteTextFile(dir + "/prices.csv",
                "region,item,price,heading\na,i1,1,c1\nb,i1,2,c1\na,i2,5,c2\nb,i2,5,c2\n");
  WriteTextFile(dir + "/expenditure.csv",
                "region,heading,expenditure\na,c1,30\na,c2,70\nb,c1,60\nb,c2,40\n");
  WriteTextFile(dir + "/run.yaml",
                "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n"
                "aggregation: geks-tornqvist\nclassification:\n  all: [c1, c2]\n");
  Computed c;
  LoadAndCompute(dir + "/run.yaml", "", "", &c);
  const ContributionTable table = HeadingContributions(c.survey, c.result, c.config.reference);
  const RegionContributions* root_a = nullptr;
  for (const RegionContributions& row : table.rows) {
    if (row.node == 0 && c.survey.regions.Code(row.region) == "a") root_a = &row;
  }
  ASSERT_NE(root_a, nullptr);
  ASSERT_EQ(root_a->headings.size(), 2u);
  EXPECT_NEAR(root_a->headings[0].price_part, -0.225 * std::log(2.0), 1e-15);
  EXPECT_NEAR(root_a->headings[1].price_part, 0.0, 1e-15);
  EXPECT_NEAR(root_a->log_parity, -0.225 * std::log(2.0), 1e-14);
  EXPECT_NEAR(root_a->headings[0].share, 0.3, 1e-15);
}

TEST(ContributionsCsv, ReadsBackToTheLnParitiesOfParitiesCsv) {
  Computed c;
  LoadAndCompute(SourcePath("config/demo.yaml"), "", "", &c);
  const std::string parities = ParitiesCsv(c.survey, c.result);
  const std::string contributions =
      ContributionsCsv(c.survey, HeadingContributions(c.survey, c.result, c.config.reference));
  std::map<std::pair<std::string, std::string>, double> sums, parity;
  CsvReader reader(contributions);
  CsvRecord record;
  ASSERT_TRUE(reader.Next(&record));
  EXPECT_EQ(record.raw,
            "node,region,heading,share,weight,heading_parity,price_part,adjustment,"
            "log_contribution");
  while (reader.Next(&record)) {
    double v = 0;
    ASSERT_EQ(ParseNumber(record.fields[8], &v), NumberStatus::kOk);
    sums[{std::string(record.fields[0]), std::string(record.fields[1])}] += v;
  }
  CsvReader parity_reader(parities);
  ASSERT_TRUE(parity_reader.Next(&record));
  while (parity_reader.Next(&record)) {
    double v = 0;
    if (ParseNumber(record.fields[3], &v) != NumberStatus::kOk) continue;
    parity[{std::string(record.fields[0]), std::string(record.fields[2])}] = v;
  }
  ASSERT_EQ(sums.size(), parity.size());
  for (const auto& [key, p] : parity) EXPECT_NEAR(sums.at(key), std::log(p / 100.0), 1e-12);
}

TEST(ContributionReport, DrawsTheChosenRegionAndAPanelPerRegion) {
  Computed c;
  LoadAndCompute(SourcePath("config/demo.yaml"), "", "", &c);
  const ContributionTable table = HeadingContributions(c.survey, c.result, c.config.reference);
  ReportInputs inputs;
  inputs.config = &c.config;
  inputs.survey = &c.survey;
  inputs.result = &c.result;
  inputs.contributions = &table;
  inputs.explain_region = "har";
  const std::string html = ReportHtml(inputs);
  EXPECT_EQ(CountOf(html, "id=\"why-dear-chart\""), 1u);
  EXPECT_EQ(CountOf(html, "<svg class=\"panel\""), static_cast<size_t>(c.survey.num_regions()));
  const int har = c.survey.regions.Find("har");
  const std::string label = c.survey.region_name[har].empty() ? "har" : c.survey.region_name[har];
  EXPECT_NE(html.find("<h3>" + HtmlEscape(label) + ": price level "), std::string::npos);
  EXPECT_NE(html.find("href=\"#why-dear\""), std::string::npos);
  inputs.contributions = nullptr;
  EXPECT_EQ(CountOf(ReportHtml(inputs), "why-dear"), 0u);
}

}  // namespace
}  // namespace paritas
