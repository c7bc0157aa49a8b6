// Outlier screening and robust CPD on a survey with one planted gross error.
#include "paritas/uncertainty/outliers.h"

#include <cmath>

#include "paritas/survey/config.h"
#include "paritas/survey/survey_loader.h"
#include "synthetic_survey.h"
#include "test_util.h"

namespace paritas {
namespace {

struct Planted {
  synthetic::SyntheticSurvey truth;
  Survey survey;
  int region = -1;  // survey index of the planted cell
  int item = -1;
};

// A synthetic survey in which every quote of one cell is 20 times too high
// (a price keyed in the wrong unit).
Planted MakePlanted(const std::string& name) {
  synthetic::SyntheticOptions options;
  options.num_regions = 15;
  options.num_headings = 3;
  options.items_per_heading = 10;
  options.noise_sd = 0.02;
  options.num_groups = 1;
  options.seed = 17;
  Planted planted;
  planted.truth = synthetic::Generate(options);
  const int bad_region = planted.truth.quote_region[40], bad_item = planted.truth.quote_item[40];
  for (size_t q = 0; q < planted.truth.quote_price.size(); ++q) {
    if (planted.truth.quote_region[q] == bad_region && planted.truth.quote_item[q] == bad_item) {
      planted.truth.quote_price[q] *= 20.0;
    }
  }
  const std::string folder = testing::MakeTempDir(name);
  std::string error;
  EXPECT_TRUE(synthetic::WriteSurvey(planted.truth, folder, &error)) << error;
  RunConfig config;
  EXPECT_TRUE(LoadRunConfig(folder + "/config.yaml", &config, &error)) << error;
  LoadSummary summary;
  EXPECT_TRUE(LoadSurvey(config, LoadOptions(), &planted.survey, &summary)) << summary.message;
  planted.region = planted.survey.regions.Find(planted.truth.regions[bad_region]);
  planted.item = planted.survey.items.Find(planted.truth.items[bad_item]);
  return planted;
}

// Largest |ln(parity / truth)| over the regions of the planted heading.
double LargestError(const Planted& planted, const ParityResult& result) {
  const int heading = planted.survey.item_heading[planted.item];
  const std::string code = planted.survey.heading_codes[heading];
  int t = 0;
  while (planted.truth.headings[t] != code) ++t;
  const int num_headings = static_cast<int>(planted.truth.headings.size());
  double mean = 0.0;
  for (size_t r = 0; r < planted.truth.regions.size(); ++r) mean += planted.truth.true_log_level[r * num_headings + t];
  mean /= planted.truth.regions.size();
  const NodeResult& node = result.nodes[planted.survey.classification.headings()[heading]];
  double largest = 0.0;
  for (size_t r = 0; r < planted.truth.regions.size(); ++r) {
    const int region = planted.survey.regions.Find(planted.truth.regions[r]);
    const double truth = planted.truth.true_log_level[r * num_headings + t] - mean;
    largest = std::max(largest, std::abs(std::log(node.parity(region) / 100.0) - truth));
  }
  return largest;
}

ParityResult ComputeWith(const Survey& survey, const std::string& method) {
  ComputeOptions options;
  options.elementary.method = method;
  ParityResult result;
  ComputeSummary summary;
  EXPECT_TRUE(ComputeParities(survey, options, &result, &summary)) << summary.message;
  return result;
}

TEST(RobustCpd, StaysNearTheTruthWhilePlainCpdIsDraggedByAGrossError) {
  const Planted planted = MakePlanted("robust_truth");
  const double plain = LargestError(planted, ComputeWith(planted.survey, "cpd"));
  const double robust = LargestError(planted, ComputeWith(planted.survey, "robust-cpd"));
  // ln 20 = 3.0 spread over ~7 cells of the region moves plain CPD by tenths.
  EXPECT_GT(plain, 0.15);
  EXPECT_LT(robust, 0.05);
}

TEST(FindOutliers, ListsThePlantedCellFirst) {
  const Planted planted = MakePlanted("outlier_first");
  for (const char* method : {"cpd", "robust-cpd", "jevons-geks"}) {
    const ParityResult result = ComputeWith(planted.survey, method);
    const OutlierReport report = FindOutliers(planted.survey, result, OutlierOptions());
    ASSERT_FALSE(report.outliers.empty()) << method;
    const Outlier& worst = report.outliers.front();
    EXPECT_EQ(worst.region, planted.region) << method;
    EXPECT_EQ(worst.item, planted.item) << method;
    EXPECT_GT(worst.standardised_residual, 10.0) << method;
    EXPECT_GT(worst.observed / worst.predicted, 5.0) << method;
  }
}

TEST(FindOutliers, CsvStartsWithThePlantedCellAndItsRatio) {
  const Planted planted = MakePlanted("outlier_csv");
  const ParityResult result = ComputeWith(planted.survey, "robust-cpd");
  const OutlierReport report = FindOutliers(planted.survey, result, OutlierOptions());
  const std::string csv = OutliersCsv(planted.survey, report);
  const std::string header = "heading,region,item,kind,observed,predicted,ratio,standardised_residual,num_quotes\n";
  ASSERT_EQ(csv.substr(0, header.size()), header);
  const std::string first = csv.substr(header.size(), csv.find('\n', header.size()) - header.size());
  const std::string expected_start = planted.survey.heading_codes[planted.survey.item_heading[planted.item]] + "," +
                                     std::string(planted.survey.regions.Code(planted.region)) + "," +
                                     std::string(planted.survey.items.Code(planted.item)) + ",";
  EXPECT_EQ(first.substr(0, expected_start.size()), expected_start);
}

TEST(FindOutliers, CountsFlaggedCellsPerHeadingAndDispersionRowsPerRegion) {
  const Planted planted = MakePlanted("outlier_counts");
  const ParityResult result = ComputeWith(planted.survey, "robust-cpd");
  const OutlierReport report = FindOutliers(planted.survey, result, OutlierOptions());
  const int heading = planted.survey.item_heading[planted.item];
  EXPECT_GE(report.num_flagged_cells[heading], 1);
  int rows_for_heading = 0;
  for (const Dispersion& d : report.dispersion) {
    if (d.heading != heading) continue;
    ++rows_for_heading;
    if (d.region == planted.region) {
      EXPECT_GE(d.num_flagged, 1);
      EXPECT_GT(d.max_abs_log_residual, 2.0);  // ln 20 = 3.0, less what the fit absorbs
    }
  }
  EXPECT_EQ(rows_for_heading, planted.survey.num_regions());
}

TEST(FindOutliers, RaisingTheThresholdFlagsFewer) {
  const Planted planted = MakePlanted("outlier_threshold");
  const ParityResult result = ComputeWith(planted.survey, "cpd");
  OutlierOptions strict, loose;
  strict.threshold = 8.0;
  loose.threshold = 2.0;
  EXPECT_LT(FindOutliers(planted.survey, result, strict).outliers.size(),
            FindOutliers(planted.survey, result, loose).outliers.size());
}

TEST(OutlierOptions, RejectsANonPositiveThreshold) {
  OutlierOptions options;
  std::string error;
  EXPECT_TRUE(options.IsValid(&error));
  options.threshold = 0.0;
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "outlier threshold must be a positive number");
}

}  // namespace
}  // namespace paritas
