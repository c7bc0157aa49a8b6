// Outlier screening and robust CPD on surveys with planted recording errors.
#include "paritas/uncertainty/outliers.h"

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <limits>
#include <random>
#include <string>
#include <tuple>
#include <vector>

#include "base/dense_kernels.h"
#include "paritas/base/csv.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey_loader.h"
#include "planted_errors.h"
#include "synthetic_survey.h"
#include "test_util.h"
#include "uncertainty/outlier_fit.h"

namespace paritas {
namespace {

// Writes a synthetic survey to a folder and loads it as the tool would.
Survey LoadSynthetic(const synthetic::SyntheticSurvey& truth, const std::string& name) {
  const std::string folder = testing::MakeTempDir(name);
  std::string error;
  EXPECT_TRUE(synthetic::WriteSurvey(truth, folder, &error)) << error;
  RunConfig config;
  EXPECT_TRUE(LoadRunConfig(folder + "/config.yaml", &config, &error)) << error;
  Survey survey;
  LoadSummary summary;
  EXPECT_TRUE(LoadSurvey(config, LoadOptions(), &survey, &summary)) << summary.message;
  return survey;
}

synthetic::SyntheticOptions SmallOptions() {
  synthetic::SyntheticOptions options;
  options.num_regions = 15;
  options.num_headings = 3;
  options.items_per_heading = 10;
  options.noise_sd = 0.02;
  options.num_groups = 1;
  options.seed = 17;
  return options;
}

struct Planted {
  synthetic::SyntheticSurvey truth;
  Survey survey;
  int region = -1;  // survey index of the planted cell
  int item = -1;
};

// A synthetic survey in which every quote of one cell is 20 times too high
// (a price keyed in the wrong unit).
Planted MakePlanted(const std::string& name) {
  Planted planted;
  planted.truth = synthetic::Generate(SmallOptions());
  const int bad_region = planted.truth.quote_region[40], bad_item = planted.truth.quote_item[40];
  synthetic::ScaleQuotes(bad_region, bad_item, 20.0, -1, &planted.truth);
  planted.survey = LoadSynthetic(planted.truth, name);
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

OutlierOptions WithFit(OutlierFit fit) {
  OutlierOptions options;
  options.fit = fit;
  return options;
}

TEST(RobustCpd, StaysNearTheTruthWhilePlainCpdIsDraggedByAGrossError) {
  const Planted planted = MakePlanted("robust_truth");
  const double plain = LargestError(planted, ComputeWith(planted.survey, "cpd"));
  const double robust = LargestError(planted, ComputeWith(planted.survey, "robust-cpd"));
  // ln 20 = 3.0 spread over ~7 cells of the region moves plain CPD by tenths.
  EXPECT_GT(plain, 0.15);
  EXPECT_LT(robust, 0.05);
}

TEST(FindOutliers, ListsThePlantedCellFirstWhateverTheElementaryMethod) {
  const Planted planted = MakePlanted("outlier_first");
  for (const char* method : {"cpd", "robust-cpd", "jevons-geks"}) {
    const ParityResult result = ComputeWith(planted.survey, method);
    const OutlierReport report = FindOutliers(planted.survey, result, OutlierOptions());
    ASSERT_FALSE(report.outliers.empty()) << method;
    const Outlier& worst = report.outliers.front();
    EXPECT_EQ(worst.kind, OutlierKind::kCell) << method;
    EXPECT_EQ(worst.region, planted.region) << method;
    EXPECT_EQ(worst.item, planted.item) << method;
    EXPECT_EQ(worst.how, ScreenedBy::kFit) << method;
    EXPECT_GT(worst.standardised_residual, 10.0) << method;
    // Predicted without the cell: the whole factor 20 shows.
    EXPECT_NEAR(worst.observed / worst.predicted, 20.0, 2.0) << method;
  }
}

// Defect of a least-squares screen: the error drags its region's parity, so
// the region's correct cells look wrong. The robust fit flags only the error.
TEST(FindOutliers, RobustFitFlagsNoCorrectCellOfTheRegionWithTheError) {
  const Planted planted = MakePlanted("outlier_drag");
  const ParityResult result = ComputeWith(planted.survey, "cpd");
  auto others_flagged = [&](const OutlierReport& report) {
    int count = 0;
    for (const Outlier& o : report.outliers) count += o.region == planted.region && o.item != planted.item;
    return count;
  };
  EXPECT_EQ(others_flagged(FindOutliers(planted.survey, result, OutlierOptions())), 0);
  EXPECT_GE(others_flagged(FindOutliers(planted.survey, result, WithFit(OutlierFit::kLeastSquares))), 2);
}

TEST(FindOutliers, CsvStartsWithThePlantedCellAndSaysHowItWasScreened) {
  const Planted planted = MakePlanted("outlier_csv");
  const ParityResult result = ComputeWith(planted.survey, "robust-cpd");
  const std::string csv = OutliersCsv(planted.survey, FindOutliers(planted.survey, result, OutlierOptions()));
  const std::string header =
      "heading,region,item,kind,observed,predicted,ratio,standardised_residual,num_quotes,how,leverage,note\n";
  ASSERT_EQ(csv.substr(0, header.size()), header);
  const std::string first = csv.substr(header.size(), csv.find('\n', header.size()) - header.size());
  const std::string expected_start = planted.survey.heading_codes[planted.survey.item_heading[planted.item]] + "," +
                                     std::string(planted.survey.regions.Code(planted.region)) + "," +
                                     std::string(planted.survey.items.Code(planted.item)) + ",cell,";
  EXPECT_EQ(first.substr(0, expected_start.size()), expected_start);
  EXPECT_NE(first.find(",2,robust fit,0."), std::string::npos) << first;
}

TEST(FindOutliers, CountsFlaggedCellsPerHeadingAndDispersionRowsPerRegion) {
  const Planted planted = MakePlanted("outlier_counts");
  const ParityResult result = ComputeWith(planted.survey, "robust-cpd");
  const OutlierReport report = FindOutliers(planted.survey, result, OutlierOptions());
  const int heading = planted.survey.item_heading[planted.item];
  EXPECT_EQ(report.num_flagged_cells[heading], 1);
  int rows_for_heading = 0;
  for (const Dispersion& d : report.dispersion) {
    if (d.heading != heading) continue;
    ++rows_for_heading;
    EXPECT_EQ(d.num_flagged, d.region == planted.region ? 1 : 0);
    if (d.region == planted.region) {
      EXPECT_GT(d.max_abs_log_residual, 2.0);  // ln 20 = 3.0
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

// Region 4 prices only the anchor of heading 1, ten times too dear: a
// least-squares residual of that cell is 0 by construction (the screen before
// leave-one-out flagged nothing at all here).
TEST(FindOutliers, FlagsATenfoldErrorInARegionsOnlyItemOfAHeading) {
  synthetic::SyntheticOptions options = SmallOptions();
  options.num_headings = 4;
  options.noise_sd = 0.03;
  options.seed = 5;
  synthetic::SyntheticSurvey truth = synthetic::Generate(options);
  const int region = 4, heading = 1, anchor = heading * options.items_per_heading;
  synthetic::KeepOnlyItem(region, heading, anchor, &truth);
  ASSERT_EQ(synthetic::ScaleQuotes(region, anchor, 10.0, -1, &truth), options.quotes_per_cell);
  const Survey survey = LoadSynthetic(truth, "outlier_single_item");
  const ParityResult result = ComputeWith(survey, "cpd");
  for (OutlierFit fit : {OutlierFit::kRobust, OutlierFit::kLeastSquares}) {
    const OutlierReport report = FindOutliers(survey, result, WithFit(fit));
    ASSERT_EQ(report.outliers.size(), 1u) << ToString(fit);
    const Outlier& worst = report.outliers.front();
    EXPECT_EQ(worst.kind, OutlierKind::kCell);
    EXPECT_EQ(survey.regions.Code(worst.region), truth.regions[region]);
    EXPECT_EQ(survey.items.Code(worst.item), truth.items[anchor]);
    EXPECT_EQ(worst.how, ScreenedBy::kLeaveOneOut);
    EXPECT_EQ(worst.leverage, 1.0);
    EXPECT_EQ(worst.note, "region's only linked cell in the heading");
    EXPECT_NEAR(worst.observed / worst.predicted, 10.0, 1.5);
    // Normal-equivalent: the spread of levels comes from 15 regions only.
    EXPECT_GT(worst.standardised_residual, 5.0);
  }
}

// An item priced in one region says nothing about anyone's prices: listed as
// not screenable, with no residual invented.
TEST(FindOutliers, ListsAnItemPricedInOneRegionAsNotScreenable) {
  synthetic::SyntheticSurvey truth = synthetic::Generate(SmallOptions());
  const int item = 3;  // heading 0, not its anchor
  const int region = truth.quote_region[std::find(truth.quote_item.begin(), truth.quote_item.end(), item) -
                                        truth.quote_item.begin()];
  synthetic::KeepItemOnlyIn(item, {region}, &truth);
  synthetic::ScaleQuotes(region, item, 10.0, -1, &truth);
  const Survey survey = LoadSynthetic(truth, "outlier_lonely_item");
  const OutlierReport report = FindOutliers(survey, ComputeWith(survey, "cpd"), OutlierOptions());
  ASSERT_EQ(report.not_screenable.size(), 1u);
  const Outlier& lonely = report.not_screenable.front();
  EXPECT_EQ(survey.items.Code(lonely.item), truth.items[item]);
  EXPECT_EQ(lonely.how, ScreenedBy::kNotScreenable);
  EXPECT_EQ(lonely.note, "item priced only in this region");
  EXPECT_TRUE(std::isnan(lonely.standardised_residual));
  EXPECT_EQ(report.num_cells_not_screenable, 1);
  for (const Outlier& o : report.outliers) EXPECT_NE(o.item, lonely.item);
  const std::string csv = OutliersCsv(survey, report);
  EXPECT_NE(csv.find("," + truth.items[item] + ",cell,"), std::string::npos);
  EXPECT_NE(csv.find(",,,,2,not screenable,1,item priced only in this region\n"), std::string::npos) << csv;
}

// A heading only one region priced has no relative price to check.
TEST(FindOutliers, ListsEveryCellOfAHeadingPricedInOneRegionAsNotScreenable) {
  synthetic::SyntheticSurvey truth = synthetic::Generate(SmallOptions());
  const int heading = 2;
  synthetic::DropQuotes([&](int r, int i) { return r != 0 && truth.item_heading[i] == heading; }, &truth);
  const Survey survey = LoadSynthetic(truth, "outlier_one_region");
  const OutlierReport report = FindOutliers(survey, ComputeWith(survey, "cpd"), OutlierOptions());
  const int h = survey.item_heading[survey.items.Find(truth.items[heading * 10])];
  ASSERT_EQ(report.not_screenable.size(), static_cast<size_t>(survey.heading_range[h].num_cells()));
  for (const Outlier& o : report.not_screenable) {
    EXPECT_EQ(o.heading, h);
    EXPECT_EQ(o.note, "heading priced in one region");
  }
  for (const Outlier& o : report.outliers) EXPECT_NE(o.heading, h);
}

// An item priced in two regions: each cell's least-squares residual is half
// the discrepancy, and nothing tells which of the two is wrong. Both are
// listed, each with the full factor against the price the other predicts.
TEST(FindOutliers, ListsBothCellsOfAnItemPricedInTwoRegionsWithTheWholeFactor) {
  synthetic::SyntheticSurvey truth = synthetic::Generate(SmallOptions());
  const int item = 14;  // heading 1, not its anchor
  std::vector<int> regions;
  for (size_t q = 0; q < truth.quote_price.size() && regions.size() < 2; ++q) {
    if (truth.quote_item[q] == item && (regions.empty() || regions.back() != truth.quote_region[q])) {
      regions.push_back(truth.quote_region[q]);
    }
  }
  ASSERT_EQ(regions.size(), 2u);
  synthetic::KeepItemOnlyIn(item, regions, &truth);
  synthetic::ScaleQuotes(regions[0], item, 10.0, -1, &truth);
  const Survey survey = LoadSynthetic(truth, "outlier_two_regions");
  const OutlierReport report = FindOutliers(survey, ComputeWith(survey, "cpd"), OutlierOptions());
  ASSERT_EQ(report.outliers.size(), 2u) << OutliersCsv(survey, report);
  for (const Outlier& o : report.outliers) {
    EXPECT_EQ(survey.items.Code(o.item), truth.items[item]);
    EXPECT_EQ(o.how, ScreenedBy::kLeaveOneOut);
    EXPECT_EQ(o.note, "item priced in 2 regions");
    const bool wrong = survey.regions.Code(o.region) == truth.regions[regions[0]];
    EXPECT_NEAR(std::log(o.observed / o.predicted), wrong ? std::log(10.0) : -std::log(10.0), 0.1);
  }
}

// One quote ten times too dear among four good ones is listed as a quote; a
// cell whose four quotes share one error is one row, not three.
TEST(FindOutliers, ListsABadQuoteButNotTheQuotesOfACellWhollyWrong) {
  synthetic::SyntheticOptions options = SmallOptions();
  options.quotes_per_cell = 5;
  synthetic::SyntheticSurvey truth = synthetic::Generate(options);
  const int region = 2;
  const int one_quote_item = synthetic::ItemsPriced(truth, region, 0)[1];
  const int whole_cell_item = synthetic::ItemsPriced(truth, region, 1)[1];
  ASSERT_EQ(synthetic::ScaleQuotes(region, one_quote_item, 10.0, 3, &truth), 1);
  ASSERT_EQ(synthetic::ScaleQuotes(region, whole_cell_item, 10.0, -1, &truth), 5);
  const Survey survey = LoadSynthetic(truth, "outlier_quotes");
  const OutlierReport report = FindOutliers(survey, ComputeWith(survey, "cpd"), OutlierOptions());
  int quote_rows = 0, whole_cell_rows = 0;
  for (const Outlier& o : report.outliers) {
    const std::string item(survey.items.Code(o.item));
    if (o.kind == OutlierKind::kHighestQuote && item == truth.items[one_quote_item]) ++quote_rows;
    if (item == truth.items[whole_cell_item]) {
      ++whole_cell_rows;
      EXPECT_EQ(o.kind, OutlierKind::kCell);
    }
  }
  EXPECT_EQ(quote_rows, 1);
  EXPECT_EQ(whole_cell_rows, 1);
  ASSERT_GE(report.outliers.size(), 2u);
  EXPECT_GT(std::abs(report.outliers[1].standardised_residual), 10.0);
}

// The screen lets cells well inside the threshold skip the full prediction
// (a test in squares with a margin). Low thresholds put many cells and
// quotes near the boundary; every row and count must be what the full
// screen gives.
TEST(FindOutliers, GivesTheSameRowsWithAndWithoutTheQuietPretest) {
  synthetic::SyntheticOptions options = SmallOptions();
  options.num_regions = 40;
  options.num_headings = 4;
  options.items_per_heading = 15;
  options.quotes_per_cell = 3;
  options.noise_sd = 0.08;
  synthetic::SyntheticSurvey truth = synthetic::Generate(options);
  synthetic::ScaleQuotes(3, synthetic::ItemsPriced(truth, 3, 0)[0], 1.6, 1, &truth);
  const Survey survey = LoadSynthetic(truth, "outlier_quiet_pretest");
  const ParityResult parities = ComputeWith(survey, "cpd");
  for (const OutlierFit fit : {OutlierFit::kRobust, OutlierFit::kLeastSquares}) {
    for (const double threshold : {0.8, 1.2, 1.7, 2.3, 3.5}) {
      OutlierOptions screen = WithFit(fit);
      screen.threshold = threshold;
      const OutlierReport with = FindOutliers(survey, parities, screen);
      internal::EnableQuietPretest(false);
      const OutlierReport without = FindOutliers(survey, parities, screen);
      internal::EnableQuietPretest(true);
      SCOPED_TRACE(threshold);
      EXPECT_GT(without.outliers.size(), 0u);
      EXPECT_EQ(OutliersCsv(survey, with), OutliersCsv(survey, without));
      EXPECT_EQ(DispersionCsv(survey, with), DispersionCsv(survey, without));
      EXPECT_EQ(with.num_cells_by_fit, without.num_cells_by_fit);
      EXPECT_EQ(with.num_cells_leave_one_out, without.num_cells_leave_one_out);
      EXPECT_EQ(with.num_cells_not_screenable, without.num_cells_not_screenable);
    }
  }
}

// Flagged cells per 1,000 screened on a clean survey of the given shape.
double FalseFlagsPerThousand(int num_regions, int num_headings, int items_per_heading, const std::string& name) {
  synthetic::SyntheticOptions options;
  options.num_regions = num_regions;
  options.num_headings = num_headings;
  options.items_per_heading = items_per_heading;
  options.num_groups = 1;
  options.seed = 20260311;
  const Survey survey = LoadSynthetic(synthetic::Generate(options), name);
  const OutlierReport report = FindOutliers(survey, ComputeWith(survey, "cpd"), OutlierOptions());
  int64_t flagged_cells = 0;
  for (const Outlier& o : report.outliers) flagged_cells += o.kind == OutlierKind::kCell ? 1 : 0;
  const int64_t screened = report.num_cells_by_fit + report.num_cells_leave_one_out;
  EXPECT_GT(screened, 3000);
  EXPECT_EQ(screened + report.num_cells_not_screenable, static_cast<int64_t>(survey.cells.size()));
  return 1000.0 * flagged_cells / screened;
}

// Normal noise only: the threshold 3.5 should flag ~0.5 cells per 1,000.
TEST(FindOutliers, FlagsFewCellsOfACleanSurvey) {
  EXPECT_LE(FalseFlagsPerThousand(40, 10, 15, "outlier_clean"), 3.0);
}

// Headings of ~25 cells: a MAD from so few residuals is itself uncertain
// (like a standard deviation on ~6 degrees of freedom), so the plain ratio
// exceeds 3.5 far more often than a normal deviate; read on the normal scale
// through Student's t, 3.5 keeps its nominal rate (~0.5 per 1,000).
TEST(FindOutliers, FlagsFewCellsOfACleanSurveyOfSmallHeadings) {
  EXPECT_LE(FalseFlagsPerThousand(8, 150, 5, "outlier_clean_small"), 1.5);  // 3.8 if read as normal
}

std::vector<std::vector<std::string>> CsvRows(const std::string& text) {
  std::vector<std::vector<std::string>> rows;
  CsvReader reader(text);
  CsvRecord record;
  while (reader.Next(&record)) rows.emplace_back(record.fields.begin(), record.fields.end());
  return rows;
}

// data/demo/README.md: eggs in `net` priced per egg (the whole cell a tenth),
// and one of five whole-milk quotes in `vel` keyed ten times too high.
TEST(FindOutliers, PutsBothPlantedDemoErrorsAtTheTopOfOutliersCsv) {
  RunConfig config;
  std::string error;
  ASSERT_TRUE(LoadRunConfig(testing::SourcePath("config/demo.yaml"), &config, &error)) << error;
  Survey survey;
  LoadSummary load;
  ASSERT_TRUE(LoadSurvey(config, LoadOptions(), &survey, &load)) << load.message;
  ParityResult result;
  ComputeSummary summary;
  ASSERT_TRUE(ComputeParities(survey, ComputeOptions::FromConfig(config), &result, &summary)) << summary.message;
  OutlierOptions options;
  options.threshold = config.outlier_threshold;
  const auto rows = CsvRows(OutliersCsv(survey, FindOutliers(survey, result, options)));
  ASSERT_GE(rows.size(), 3u);
  auto key = [](const std::vector<std::string>& row) { return row[0] + " " + row[1] + " " + row[2] + " " + row[3]; };
  EXPECT_EQ(key(rows[1]), "dairy_eggs net eggs cell");
  EXPECT_EQ(key(rows[2]), "dairy_eggs vel whole_milk highest_quote");
  EXPECT_EQ(rows[2][4], "9.13");  // the quote as keyed, read back exactly
}

// Two regions, six items priced in both; item 6 is 2.0 log points dearer in
// region 0 (the others -0.04..0.04). With item weights w_i the fit is
// a = sum w_i d_i / sum w_i and a clean cell's hat value 1/2 + 1/(2 sum w_i).
// The middle |residuals| are |d_i - a| / 2 for d = 0.04 and -0.02, whose mean
// is 0.015 for 0 < a < 0.02, so with the outlier's weight w the scale is
// s = 1.4826 x 0.015 / sqrt(1/2 - 1/(2 (5 + w))), and the fixed point has
// a = 2w / (5 + w) and w = k / |e| = 2k / (2 - a), k = 1.345 s.
TEST(ScreenFit, RobustScaleReestimationConvergesToTheHandComputedFixedPoint) {
  const std::vector<double> d = {-0.04, -0.02, 0.0, 0.02, 0.04, 2.0};
  std::vector<int> region, item;
  std::vector<double> log_price;
  for (int i = 0; i < 6; ++i) {
    for (int r = 0; r < 2; ++r) {
      region.push_back(r);
      item.push_back(i);
      log_price.push_back(1.0 + 0.1 * i + (r == 0 ? d[i] : 0.0));
    }
  }
  CpdData data;
  data.num_regions = 2;
  data.num_items = 6;
  data.region = region;
  data.item = item;
  data.log_price = log_price;
  OutlierOptions options;
  options.weight_tolerance = 1e-10;  // to the fixed point, for the comparison below
  const internal::ScreenFit fit = internal::FitScreen(data, options);
  ASSERT_TRUE(fit.identified);
  EXPECT_TRUE(fit.converged);
  EXPECT_GT(fit.num_iterations, 1);
  EXPECT_LT(fit.num_iterations, 30);
  double w = 1.0, a = 0.0, s = 0.0;
  for (int step = 0; step < 100; ++step) {  // the three equations, to their fixed point
    a = 2.0 * w / (5.0 + w);
    s = 1.4826 * 0.015 / std::sqrt(0.5 - 0.5 / (5.0 + w));
    w = 2.0 * 1.345 * s / (2.0 - a);
  }
  ASSERT_LT(a, 0.02);
  PARITAS_EXPECT_CLOSE(fit.scale, s, 1e-9);
  PARITAS_EXPECT_CLOSE(fit.log_parity[0] - fit.log_parity[1], a, 1e-9);
  PARITAS_EXPECT_CLOSE(fit.weight[10], w, 1e-9);
  PARITAS_EXPECT_CLOSE(fit.weight[11], fit.weight[10], 1e-12);
  for (int c = 0; c < 10; ++c) EXPECT_EQ(fit.weight[c], 1.0) << c;
  // Least squares stops at the start: a = mean of d.
  const internal::ScreenFit plain = internal::FitScreen(data, WithFit(OutlierFit::kLeastSquares));
  PARITAS_EXPECT_CLOSE(plain.log_parity[0] - plain.log_parity[1], 2.0 / 6.0, 1e-12);
  EXPECT_EQ(plain.num_iterations, 0);
}

// Cells for RobustScale: residual +-e(k) (e drawn first, then the sign),
// weight 0.5 for every fifth cell and 1 otherwise, leverage q(k), every
// 13th cell cutting its heading; `terms` holds |e| / sqrt(1 - w q) of the
// cells the scale is taken over (in cell order), `sorted` the same sorted,
// and `median` their median.
struct ScaleCells {
  Eigen::VectorXd residual, weight, leverage;
  std::vector<internal::CellLink> link;
  std::vector<double> terms, sorted;
  double median = 0.0;
};

template <typename ResidualFn, typename LeverageFn>
ScaleCells MakeScaleCells(int n, std::mt19937_64* random, ResidualFn e_of, LeverageFn q_of) {
  ScaleCells cells;
  cells.residual.resize(n), cells.weight.resize(n), cells.leverage.resize(n);
  cells.link.assign(n, internal::CellLink::kNone);
  for (int k = 0; k < n; ++k) {
    const double e = e_of(k);
    cells.residual[k] = (*random)() % 2 == 0 ? e : -e;
    cells.weight[k] = k % 5 == 0 ? 0.5 : 1.0;
    cells.leverage[k] = q_of(k);
    if (k % 13 == 1) cells.link[k] = internal::CellLink::kCutsHeading;
    const double hat = cells.weight[k] * cells.leverage[k];
    if (cells.link[k] == internal::CellLink::kNone && hat < 1.0 - 1e-9) {
      cells.terms.push_back(std::abs(cells.residual[k]) / std::sqrt(1.0 - hat));
    }
  }
  std::vector<double>& sorted = cells.sorted;
  sorted = cells.terms;
  std::sort(sorted.begin(), sorted.end());
  const size_t m = sorted.size();
  cells.median = m % 2 == 1 ? sorted[m / 2] : 0.5 * (sorted[m / 2 - 1] + sorted[m / 2]);
  return cells;
}

// The scale is 1.4826 x the median of |e| / sqrt(1 - w q) over the cells
// that carry residual information, the median as sorting gives it (computed
// here with std::sort); more than half exact fits give the root mean square
// of those terms instead. Term counts above and below the selection's
// four-tally threshold (16,384), odd and even, with many terms sharing their
// exponent, tied values, exact zeros and cells left out (a link, w q = 1).
TEST(ScreenFit, RobustScaleIsTheSortedMedianOfTheStandardisedResiduals) {
  std::mt19937_64 random(5);
  for (int n : {9, 10, 2001, 2002, 40001, 40002}) {
    for (int kind = 0; kind < 3; ++kind) {
      SCOPED_TRACE(std::to_string(n) + " cells, kind " + std::to_string(kind));
      const ScaleCells cells = MakeScaleCells(
          n, &random,
          [&](int) {
            return kind == 0   ? 0.01 * std::ldexp(1.0 + static_cast<double>(random() % 1000) / 1000.0,
                                                   -static_cast<int>(random() % 3))
                   : kind == 1 ? static_cast<double>(random() % 7) * 0.125
                               : (random() % 3 == 0 ? 0.02 : 0.0);
          },
          [](int k) { return k % 11 == 0 ? 2.0 : 0.3; });  // w q = 1 for k = 0, 55, ...
      const size_t m = cells.terms.size();
      double sum = 0.0;
      for (double v : cells.terms) sum += v * v;
      const double want =
          cells.median > 0.0 ? 1.4826 * cells.median : std::sqrt(sum / static_cast<double>(m));
      internal::ScaleScratch scratch;
      int num_cells = 0;
      EXPECT_EQ(internal::RobustScale(cells.residual, cells.weight, cells.leverage, cells.link,
                                      &scratch, &num_cells),
                want);
      EXPECT_EQ(num_cells, static_cast<int>(m));
    }
  }
}

// The scale's median is looked for first near the last median the
// workspace found (a guess that decides only the speed): whatever the guess,
// far off, just inside or just outside the window around it on either side,
// on odd and even counts, with the middle terms tied or apart, the scale is
// the one sorting gives, with either tally of the terms against the window.
TEST(ScreenFit, RobustScaleDoesNotDependOnTheMedianGuessed) {
  std::mt19937_64 random(11);
  for (int n : {9, 10, 501, 502, 5001, 5002}) {
    for (int kind = 0; kind < 2; ++kind) {
      SCOPED_TRACE(std::to_string(n) + " cells, kind " + std::to_string(kind));
      const ScaleCells cells = MakeScaleCells(
          n, &random,
          [&](int) {
            return kind == 0 ? 0.01 * (1.0 + static_cast<double>(random() % 100000) / 1000.0)
                             : 0.125 * static_cast<double>(1 + random() % 5);
          },
          [](int k) { return k % 11 == 0 ? 2.0 : 0.3 + 0.001 * static_cast<double>(k % 7); });
      const std::vector<double>& sorted = cells.sorted;
      const size_t m = sorted.size();
      const double want = 1.4826 * cells.median;
      // Guesses that put the window's edges on, just above and just below
      // the middle terms and their neighbours, and guesses far off.
      std::vector<double> guesses = {0.0, 1e-3 * sorted[m / 2], 1e3 * sorted[m / 2], sorted.front(), sorted.back()};
      for (size_t r = m / 2 - 2; r <= m / 2 + 2; ++r) {
        for (double edge : {1.0 - 1.0 / 64.0, 1.0, 1.0 + 1.0 / 64.0}) {
          const double guess = sorted[r] / edge;
          guesses.insert(guesses.end(), {guess, std::nextafter(guess, 0.0), std::nextafter(guess, 1.0)});
        }
      }
      internal::ScaleScratch scratch;
      for (const bool vector_tally : {true, false}) {
        internal::EnableVectorCellPasses(vector_tally);
        for (double guess : guesses) {
          scratch.median_guess = guess;
          int num_cells = 0;
          EXPECT_EQ(internal::RobustScale(cells.residual, cells.weight, cells.leverage, cells.link,
                                          &scratch, &num_cells),
                    want)
              << guess << (vector_tally ? ", vector tally" : ", scalar tally");
          EXPECT_EQ(num_cells, static_cast<int>(m));
          EXPECT_EQ(scratch.median_guess * 1.4826, want);  // the next call's guess: this median
        }
      }
      internal::EnableVectorCellPasses(true);
    }
  }
}

// The same with terms the window's tally places without forming them next
// to terms it must form: zero, infinite and NaN residuals, hat values at
// the edge of the cells kept, slightly negative leverages, cells that cut
// the heading, and guesses that put the window's edges, and the bounds its
// squares are compared with, on a term (and one unit either side of it).
// Both tallies: on vectors of 8 cells (where the dense products run on
// AVX-512) and one cell at a time; 3 to 42 cells, so the vector loop's
// last cells go one by one too.
TEST(ScreenFit, RobustScaleDoesNotDependOnTheGuessWithNonFiniteOrEdgeTerms) {
  std::mt19937_64 random(7);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  const double nan = std::numeric_limits<double>::quiet_NaN(), inf = std::numeric_limits<double>::infinity();
  for (int trial = 0; trial < 300; ++trial) {
    const int n = 3 + static_cast<int>(random() % 40);
    Eigen::VectorXd residual(n), weight(n), leverage(n);
    std::vector<internal::CellLink> link(n, internal::CellLink::kNone);
    const double size = std::pow(10.0, -90.0 + 180.0 * uniform(random));
    for (int k = 0; k < n; ++k) {
      const int kind = static_cast<int>(random() % 12);
      weight[k] = kind == 0 ? 1e-12 : 0.2 + 0.8 * uniform(random);
      leverage[k] = kind == 1 ? -1e-17 : kind == 2 ? (1.0 - 2e-9) / weight[k] : kind == 3 ? 1.0 / weight[k] : uniform(random);
      const double term = kind == 4 ? size : size * (0.5 + uniform(random));  // kind 4: ties
      residual[k] = (random() % 2 == 0 ? 1.0 : -1.0) * term * std::sqrt(std::max(0.0, 1.0 - weight[k] * leverage[k]));
      if (kind == 5) residual[k] = random() % 2 == 0 ? nan : -nan;
      if (kind == 6) residual[k] = random() % 2 == 0 ? inf : -inf;
      if (kind == 7) residual[k] = 0.0;
      if (kind == 8) link[k] = internal::CellLink::kCutsHeading;
    }
    internal::ScaleScratch without_guess;
    int want_cells = 0;
    const double want = internal::RobustScale(residual, weight, leverage, link, &without_guess, &want_cells);
    std::vector<double> guesses = {without_guess.median_guess, 1.01 * without_guess.median_guess};
    for (int k = 0; k < n; ++k) {
      const double term = std::abs(residual[k]) / std::sqrt(1.0 - weight[k] * leverage[k]);
      if (!std::isfinite(term)) continue;
      for (double edge : {1.0 - 1.0 / 64.0, 1.0 + 1.0 / 64.0}) {
        for (double margin : {1.0, 1.0 - 1e-6, 1.0 + 1e-6}) {
          const double guess = term / edge / margin;
          guesses.insert(guesses.end(), {guess, std::nextafter(guess, 0.0), std::nextafter(guess, inf)});
        }
      }
    }
    for (const bool vector_tally : {true, false}) {
      internal::EnableVectorCellPasses(vector_tally);
      for (double guess : guesses) {
        internal::ScaleScratch scratch;
        scratch.median_guess = guess;
        int num_cells = 0;
        const double got = internal::RobustScale(residual, weight, leverage, link, &scratch, &num_cells);
        EXPECT_TRUE(got == want || (std::isnan(got) && std::isnan(want)))
            << trial << " " << guess << ": " << got << " " << want << (vector_tally ? ", vector tally" : "");
        EXPECT_EQ(num_cells, want_cells);
      }
    }
    internal::EnableVectorCellPasses(true);
  }
}

// x'(X'WX)^+ x by the block formula against a dense pseudo-inverse.
TEST(ScreenFit, LeverageFactorsMatchADensePseudoInverse) {
  const std::vector<int> region = {0, 1, 2, 3, 0, 1, 2, 0, 3, 1, 2, 3, 0};
  const std::vector<int> item = {0, 0, 0, 0, 1, 1, 1, 2, 2, 3, 3, 4, 4};
  Eigen::VectorXd weight(13);
  weight << 1, 0.5, 2, 1, 1, 0.1, 1, 3, 1, 1, 0.7, 1, 1;
  Eigen::MatrixXd x = Eigen::MatrixXd::Zero(13, 4 + 5);
  for (int k = 0; k < 13; ++k) x(k, region[k]) = x(k, 4 + item[k]) = 1.0;
  const Eigen::MatrixXd normal = x.transpose() * weight.asDiagonal() * x;
  const Eigen::MatrixXd pinv = normal.completeOrthogonalDecomposition().pseudoInverse();
  for (bool transpose : {false, true}) {  // regions or items on the dense side
    const Eigen::VectorXd q = transpose ? internal::LeverageFactors(5, 4, item, region, weight)
                                        : internal::LeverageFactors(4, 5, region, item, weight);
    for (int k = 0; k < 13; ++k) PARITAS_EXPECT_CLOSE(q[k], x.row(k) * pinv * x.row(k).transpose(), 1e-10);
  }
}

// Cells repeated (two cells of one region and item) add their weights in
// X'WX: the block formula still matches the dense pseudo-inverse.
TEST(ScreenFit, LeverageFactorsCountRepeatedCellsInTheNormalEquations) {
  const std::vector<int> region = {0, 1, 2, 0, 1, 2, 0, 2, 1};
  const std::vector<int> item = {0, 0, 0, 1, 1, 1, 0, 2, 2};  // cell 6 repeats cell 0
  Eigen::VectorXd weight(9);
  weight << 1, 0.5, 2, 1, 1, 0.3, 0.8, 1, 1;
  Eigen::MatrixXd x = Eigen::MatrixXd::Zero(9, 3 + 3);
  for (int k = 0; k < 9; ++k) x(k, region[k]) = x(k, 3 + item[k]) = 1.0;
  const Eigen::MatrixXd pinv =
      (x.transpose() * weight.asDiagonal() * x).completeOrthogonalDecomposition().pseudoInverse();
  const Eigen::VectorXd q = internal::LeverageFactors(3, 3, region, item, weight);
  for (int k = 0; k < 9; ++k) PARITAS_EXPECT_CLOSE(q[k], x.row(k) * pinv * x.row(k).transpose(), 1e-10);
}

// A heading's cells for the bit-for-bit tests below: regions 0-1 and items
// 0-1 complete, the other cells at `coverage`, about one in 37 with a gross
// error (Huber weights below 1).
struct RandomHeading {
  std::vector<int> region, item;
  std::vector<double> log_price;
  CpdData data;

  RandomHeading(int num_regions, int num_items, double coverage, std::mt19937_64* random) {
    for (int i = 0; i < num_items; ++i) {
      for (int r = 0; r < num_regions; ++r) {
        if (r > 1 && i > 1 && static_cast<double>((*random)() % 1000) >= 1000.0 * coverage) continue;
        region.push_back(r);
        item.push_back(i);
        const double noise = static_cast<double>((*random)() % 2001) / 1000.0 - 1.0;
        log_price.push_back(0.01 * r + 0.1 * i + 0.05 * noise + ((*random)() % 37 == 0 ? 1.5 : 0.0));
      }
    }
    data.num_regions = num_regions;
    data.num_items = num_items;
    data.region = region;
    data.item = item;
    data.log_price = log_price;
  }
};

// Every bit of two fits of one heading.
void ExpectSameFit(const internal::ScreenFit& got, const internal::ScreenFit& want, int num_regions) {
  ASSERT_TRUE(want.identified);
  EXPECT_GT(want.num_iterations, 1);
  EXPECT_EQ(got.num_iterations, want.num_iterations);
  EXPECT_EQ(got.scale, want.scale);
  for (int64_t k = 0; k < want.residual.size(); ++k) {
    EXPECT_EQ(got.residual[k], want.residual[k]) << k;
    EXPECT_EQ(got.weight[k], want.weight[k]) << k;
    EXPECT_EQ(got.leverage[k], want.leverage[k]) << k;
  }
  for (int r = 0; r < num_regions; ++r) EXPECT_EQ(got.log_parity[r], want.log_parity[r]) << r;
}

// One workspace carried from heading to heading (as each thread of
// FindOutliers does) leaves no trace in the fits: headings of the same or
// other shapes in between, regions or items on the dense side, give the
// same bits as a fresh workspace.
TEST(ScreenFit, AWorkspaceReusedAcrossHeadingsGivesTheSameBits) {
  std::mt19937_64 random(11);
  const RandomHeading headings[4] = {RandomHeading(40, 6, 0.7, &random),   // items dense
                                     RandomHeading(5, 30, 0.8, &random),   // regions dense
                                     RandomHeading(60, 9, 0.5, &random),
                                     RandomHeading(40, 6, 0.5, &random)};  // heading 0's shape, other cells
  const OutlierOptions options;
  internal::FitWorkspace workspace;
  for (int h : {0, 3, 1, 0, 2, 2, 1, 3}) {
    SCOPED_TRACE("heading " + std::to_string(h));
    const internal::ScreenFit fresh = internal::FitScreen(headings[h].data, options);
    ExpectSameFit(internal::FitScreen(headings[h].data, options, &workspace), fresh, headings[h].data.num_regions);
  }
}

// The per-cell passes on vectors of 8 cells (where the dense products run
// on AVX-512) give the bits of the scalar loops: the Huber weights (with
// cells beyond the cutoff in every heading), the scale's terms and its
// tally, on headings of 60 to about 600 cells, so the vectors' last cells
// go one by one too. Skipped on a CPU without AVX-512, where both runs would
// take the scalar loops.
TEST(ScreenFit, VectorCellPassesGiveTheBitsOfTheScalarLoops) {
  if (internal::ActiveDenseKernels() != internal::DenseKernels::kAvx512) {
    GTEST_SKIP() << "the dense products do not run on AVX-512 here: no vector passes to compare";
  }
  std::mt19937_64 random(23);
  const OutlierOptions options;
  for (const auto& [num_regions, num_items, coverage] :
       {std::tuple{20, 3, 1.0}, {40, 6, 0.7}, {5, 30, 0.8}, {61, 9, 0.5}, {101, 7, 0.9}}) {
    const RandomHeading heading(num_regions, num_items, coverage, &random);
    SCOPED_TRACE(std::to_string(heading.region.size()) + " cells");
    internal::EnableVectorCellPasses(false);
    const internal::ScreenFit scalar = internal::FitScreen(heading.data, options);
    internal::EnableVectorCellPasses(true);
    ExpectSameFit(internal::FitScreen(heading.data, options), scalar, num_regions);
  }
}

// Regions 0-2 share items 0 and 1; region 3's only cell is item 0; item 2 is
// priced only by region 2; regions 4 and 5 share item 3, and region 5 alone
// links the pair to the rest, through item 1: every cell of the chain
// 4-(3)-5-(1) cuts the heading.
TEST(ScreenFit, FindsTheCellsWhoseHatValueIsOne) {
  const std::vector<int> region = {0, 1, 2, 0, 1, 2, 3, 2, 4, 5, 5};
  const std::vector<int> item = {0, 0, 0, 1, 1, 1, 0, 2, 3, 3, 1};
  std::vector<internal::CellLink> link;
  std::map<int, std::vector<int>> side;
  EXPECT_EQ(internal::FindCuttingCells(6, 4, region, item, &link, &side), 1);
  using internal::CellLink;
  std::vector<CellLink> expected(11, CellLink::kNone);
  expected[6] = expected[8] = expected[9] = expected[10] = CellLink::kCutsHeading;
  expected[7] = CellLink::kItemOnlyHere;
  EXPECT_EQ(link, expected);
  // Sides with several regions: (5, 3) leaves region 5 with the main part;
  // (5, 1) leaves it with region 4.
  ASSERT_EQ(side.size(), 2u);
  EXPECT_EQ(side.at(9), (std::vector<int>{0, 1, 2, 3, 5}));
  EXPECT_EQ(side.at(10), (std::vector<int>{4, 5}));
}

// The graph search counts the groups of linked regions: regions 0-1 share
// item 0, regions 2-3 item 1, region 4 alone prices item 2; a cell joining
// region 1 to item 1 links the first two groups.
TEST(ScreenFit, CountsTheGroupsOfLinkedRegions) {
  std::vector<int> region = {0, 1, 2, 3, 4}, item = {0, 0, 1, 1, 2};
  std::vector<internal::CellLink> link;
  std::map<int, std::vector<int>> side;
  EXPECT_EQ(internal::FindCuttingCells(5, 3, region, item, &link, &side), 3);
  region.push_back(1);
  item.push_back(1);
  EXPECT_EQ(internal::FindCuttingCells(5, 3, region, item, &link, &side), 2);
  EXPECT_EQ(internal::FindCuttingCells(1, 1, std::vector<int>{0}, std::vector<int>{0}, &link, &side), 1);
}

TEST(OutlierOptions, DefaultsAreValidAndOutOfRangeFieldsAreNamed) {
  OutlierOptions options;
  std::string error;
  EXPECT_TRUE(options.IsValid(&error));
  options.threshold = 0.0;
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "outlier threshold must be a positive number");
  options = OutlierOptions();
  options.max_iterations = 0;
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "outlier max_iterations is 0; it must be from 1 to 10,000");
  options = OutlierOptions();
  options.huber_constant = -1.0;
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "outlier huber_constant must be a positive number");
  options = OutlierOptions();
  options.weight_tolerance = 0.0;
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "outlier weight_tolerance must be above 0 and at most 0.5");
  options = OutlierOptions();
  options.num_threads = -1;
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "outlier num_threads is -1; it must be 0 (all cores) or more");
}

TEST(OutlierFit, NamesReadBackCaseInsensitively) {
  OutlierFit fit = OutlierFit::kRobust;
  EXPECT_TRUE(FromString(" Least-Squares", &fit));
  EXPECT_EQ(fit, OutlierFit::kLeastSquares);
  EXPECT_EQ(ToString(fit), "least-squares");
  EXPECT_FALSE(FromString("huber", &fit));
  EXPECT_EQ(ToString(ScreenedBy::kFit, OutlierFit::kRobust), "robust fit");
}

}  // namespace
}  // namespace paritas
