// Plausibility warnings on generated surveys with planted defects: each test
// plants one defect a trial found published silently and checks that the
// run names it (kind, node, region and text) and marks parities.csv.
#include "paritas/compute/plausibility.h"

#include <algorithm>
#include <cmath>

#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include "paritas/base/csv.h"
#include "paritas/jobs/jobs.h"
#include "synthetic_survey.h"
#include "test_util.h"

namespace paritas {
namespace {

using testing::MakeTempDir;
using testing::ReadTextFile;
using testing::RunCli;

synthetic::SyntheticOptions Options() {
  synthetic::SyntheticOptions options;
  options.num_regions = 8;
  options.num_headings = 6;
  options.items_per_heading = 5;
  options.coverage = 0.9;
  options.quotes_per_cell = 3;
  options.noise_sd = 0.04;
  options.num_groups = 2;
  options.seed = 11;
  return options;
}

// Leaves out the quotes for which `drop(region, item)` holds.
template <typename Drop>
void DropQuotes(synthetic::SyntheticSurvey* s, Drop drop) {
  size_t out = 0;
  for (size_t q = 0; q < s->quote_price.size(); ++q) {
    if (drop(s->quote_region[q], s->quote_item[q])) continue;
    s->quote_region[out] = s->quote_region[q];
    s->quote_item[out] = s->quote_item[q];
    s->quote_price[out] = s->quote_price[q];
    if (!s->quote_representative.empty()) s->quote_representative[out] = s->quote_representative[q];
    ++out;
  }
  if (!s->quote_representative.empty()) s->quote_representative.resize(out);
  s->quote_region.resize(out);
  s->quote_item.resize(out);
  s->quote_price.resize(out);
}

// Writes the survey, runs the compute job and returns its summary.
ComputeJobSummary RunJob(const synthetic::SyntheticSurvey& survey, const std::string& name,
                      std::string* folder = nullptr, int threads = 0) {
  const std::string dir = MakeTempDir(name);
  std::string error;
  EXPECT_TRUE(synthetic::WriteSurvey(survey, dir, &error)) << error;
  RunConfig config;
  EXPECT_TRUE(LoadRunConfig(dir + "/config.yaml", &config, &error)) << error;
  config.output = dir + "/out";
  config.report = false;
  config.threads = threads;
  ComputeJobSummary summary;
  EXPECT_EQ(RunCompute(config, &summary), kExitOk) << summary.message;
  if (folder != nullptr) *folder = dir;
  return summary;
}

std::vector<RunWarning> OfKind(const ComputeJobSummary& s, const std::string& kind) {
  std::vector<RunWarning> out;
  for (const RunWarning& w : s.warnings) {
    if (w.kind == kind) out.push_back(w);
  }
  return out;
}

// The parities.csv row of a node and region, as a column name -> value map.
std::map<std::string, std::string> ParityRow(const std::string& dir, const std::string& node,
                                             const std::string& region) {
  const std::string text = ReadTextFile(dir + "/out/parities.csv");  // outlives the reader's views
  CsvReader reader(text);
  CsvRecord record;
  EXPECT_TRUE(reader.Next(&record));
  const std::vector<std::string> header(record.fields.begin(), record.fields.end());
  while (reader.Next(&record)) {
    if (record.fields[0] != node || record.fields[2] != region) continue;
    std::map<std::string, std::string> row;
    for (size_t k = 0; k < header.size(); ++k) row[header[k]] = std::string(record.fields[k]);
    return row;
  }
  ADD_FAILURE() << node << " " << region << " not in parities.csv";
  return {};
}

TEST(Plausibility, CleanSurveyRaisesNoWarning) {
  const ComputeJobSummary s = RunJob(synthetic::Generate(Options()), "plaus_clean");
  EXPECT_TRUE(s.warnings.empty()) << WarningsText(s.warnings);
}

// A region whose rents were not surveyed came out cheaper than it is and
// nothing said so: the aggregates now name the share resting on its own
// parities, and parities.csv carries it.
TEST(Plausibility, RegionWithoutADearHeadingGetsAPartialBasketWarning) {
  synthetic::SyntheticSurvey truth = synthetic::Generate(Options());
  const int region = 3, heading = 1, num_headings = 6;
  DropQuotes(&truth, [&](int r, int i) { return r == region && truth.item_heading[i] == heading; });
  // Its spending on the heading: 40 % of the group's (headings 0-2).
  double others = 0.0;
  for (int h = 0; h < 3; ++h) others += h == heading ? 0.0 : truth.expenditure[region * num_headings + h];
  truth.expenditure[region * num_headings + heading] = others * 2.0 / 3.0;
  std::string dir;
  const ComputeJobSummary s = RunJob(truth, "plaus_partial", &dir);
  const std::vector<RunWarning> partial = OfKind(s, "partial-basket");
  // The group and, since the group is about half of all spending, the root.
  ASSERT_EQ(partial.size(), 2u) << WarningsText(s.warnings);
  EXPECT_EQ(partial[0].node, "all");
  EXPECT_EQ(partial[1].node, "g01");
  EXPECT_EQ(partial[1].region, truth.regions[region]);
  EXPECT_EQ(partial[1].text,
            "aggregate 'g01', region '" + truth.regions[region] +
                "': only 60.0 % of its spending rests on headings it has parities for "
                "(checks.min_basket_share 90.0 %); without a parity: h002 40.0 %; its level there "
                "is in effect taken from its other headings");
  const auto row = ParityRow(dir, "g01", truth.regions[region]);
  // Expenditure is written with 6 significant digits.
  EXPECT_NEAR(std::stod(row.at("basket_share")), 0.6, 1e-8);
  EXPECT_EQ(row.at("warnings"), "partial-basket");
  EXPECT_EQ(ParityRow(dir, "g02", truth.regions[region]).at("basket_share"), "1");
}

// The levels are formed on the run's threads: one thread or two give the
// same warnings in the same order (heading by heading, region by region).
TEST(Plausibility, LevelWarningsAreTheSameOnOneThreadOrTwo) {
  synthetic::SyntheticSurvey truth = synthetic::Generate(Options());
  for (size_t q = 0; q < truth.quote_price.size(); ++q) {
    const int r = truth.quote_region[q], h = truth.item_heading[truth.quote_item[q]];
    if ((h == 1 || h == 4) && (r == 2 || r == 5 || r == 6)) truth.quote_price[q] *= 10;
  }
  const ComputeJobSummary one = RunJob(truth, "plaus_levels_one", nullptr, 1);
  const ComputeJobSummary two = RunJob(truth, "plaus_levels_two", nullptr, 2);
  const std::vector<RunWarning> levels = OfKind(one, "implausible-level");
  ASSERT_GE(levels.size(), 4u) << WarningsText(one.warnings);
  for (size_t k = 1; k < levels.size(); ++k) {
    EXPECT_LE(levels[k - 1].node, levels[k].node);
    if (levels[k - 1].node == levels[k].node) {
      EXPECT_LT(levels[k - 1].region, levels[k].region);
    }
  }
  EXPECT_EQ(WarningsText(one.warnings), WarningsText(two.warnings));
}

// A tenfold keying error in a region's only item of a heading moved a food
// parity from 105 to 263 unflagged: now its level and the outlier screen
// both name it.
TEST(Plausibility, TenfoldErrorInARegionsOnlyItemIsNamedTwice) {
  synthetic::SyntheticSurvey truth = synthetic::Generate(Options());
  const int region = 5, heading = 4, anchor = heading * 5;
  DropQuotes(&truth, [&](int r, int i) {
    return r == region && truth.item_heading[i] == heading && i != anchor;
  });
  for (size_t q = 0; q < truth.quote_price.size(); ++q) {
    if (truth.quote_region[q] == region && truth.quote_item[q] == anchor) truth.quote_price[q] *= 10;
  }
  std::string dir;
  const ComputeJobSummary s = RunJob(truth, "plaus_tenfold", &dir);
  const std::string code = truth.regions[region];
  auto names = [&](const std::string& kind) {
    const auto list = OfKind(s, kind);
    return std::any_of(list.begin(), list.end(), [&](const RunWarning& w) {
      return w.node == "h005" && w.region == code;
    });
  };
  EXPECT_TRUE(names("implausible-level")) << WarningsText(s.warnings);
  EXPECT_TRUE(names("gross-outlier")) << WarningsText(s.warnings);
  EXPECT_TRUE(names("thin-evidence")) << WarningsText(s.warnings);
  EXPECT_EQ(ParityRow(dir, "h005", code).at("warnings"),
            "thin-evidence;implausible-level;gross-outlier");
}

// A price of 1e300 gave a parity of 9e12 under "Warnings: None" (1e300 is
// now a row error; 1e25 is within the range read).
TEST(Plausibility, AbsurdPriceIsAGrossOutlier) {
  synthetic::SyntheticSurvey truth = synthetic::Generate(Options());
  truth.quote_price[7] = 1e25;
  const ComputeJobSummary s = RunJob(truth, "plaus_absurd");
  const auto gross = OfKind(s, "gross-outlier");
  ASSERT_FALSE(gross.empty()) << WarningsText(s.warnings);
  EXPECT_EQ(gross[0].region, truth.regions[truth.quote_region[7]]);
}

// A heading without spending anywhere dropped out of every aggregate without
// a word.
TEST(Plausibility, HeadingWithoutSpendingIsNamed) {
  synthetic::SyntheticSurvey truth = synthetic::Generate(Options());
  for (int r = 0; r < 8; ++r) truth.expenditure[r * 6 + 2] = 0.0;
  const ComputeJobSummary s = RunJob(truth, "plaus_weights");
  const auto weights = OfKind(s, "weights");
  ASSERT_EQ(weights.size(), 1u) << WarningsText(s.warnings);
  EXPECT_EQ(weights[0].text,
            "heading 'h003': no region has spending on it, so it counts in no aggregate");
}

TEST(Plausibility, SingleItemHeadingIsNamedOnceNotPerRegion) {
  synthetic::SyntheticSurvey truth = synthetic::Generate(Options());
  DropQuotes(&truth, [&](int, int i) { return truth.item_heading[i] == 0 && i != 0; });
  const ComputeJobSummary s = RunJob(truth, "plaus_single");
  const auto single = OfKind(s, "single-item-heading");
  ASSERT_EQ(single.size(), 1u) << WarningsText(s.warnings);
  EXPECT_EQ(single[0].text,
            "heading 'h001': one item priced ('" + truth.items[0] +
                "'); its parities rest on that item alone");
  for (const RunWarning& w : OfKind(s, "thin-evidence")) EXPECT_NE(w.node, "h001") << w.text;
}

// "0 warnings" was printed above a listed warning: the count printed, the
// count listed, warnings.csv and run.json agree.
TEST(Plausibility, CountPrintedIsTheCountListedEverywhere) {
  synthetic::SyntheticSurvey truth = synthetic::Generate(Options());
  truth.quote_price[7] *= 100;
  const std::string dir = MakeTempDir("plaus_counts");
  std::string error;
  ASSERT_TRUE(synthetic::WriteSurvey(truth, dir, &error)) << error;
  std::string out, err;
  ASSERT_EQ(RunCli("compute " + dir + "/config.yaml --no-report --output " + dir + "/out", &out,
                   &err),
            0)
      << err;
  const nlohmann::json record = nlohmann::json::parse(ReadTextFile(dir + "/out/run.json"));
  const int64_t n = record["num_warnings"].get<int64_t>();
  ASSERT_GT(n, 0);
  const std::string count = std::to_string(n) + (n == 1 ? " warning" : " warnings");
  EXPECT_NE(out.find("; " + count + " (listed at the end"), std::string::npos) << out;
  EXPECT_EQ(err.rfind("\n" + count + " (every one in warnings.csv):\n", 0), 0u) << err;
  const std::string csv = ReadTextFile(dir + "/out/warnings.csv");
  EXPECT_EQ(std::count(csv.begin(), csv.end(), '\n'), n + 1);
  EXPECT_EQ(record["warning_counts"]["gross-outlier"].get<int64_t>(), 1);
}

// Strict mode stops a pipeline before publishing, after writing everything.
TEST(Plausibility, StrictModeExitsWithThreeAfterWritingEverything) {
  synthetic::SyntheticSurvey truth = synthetic::Generate(Options());
  truth.quote_price[7] *= 100;
  const std::string dir = MakeTempDir("plaus_strict");
  std::string error;
  ASSERT_TRUE(synthetic::WriteSurvey(truth, dir, &error)) << error;
  std::string out, err;
  EXPECT_EQ(RunCli("compute " + dir + "/config.yaml --strict --output " + dir + "/out", &out, &err),
            3);
  EXPECT_TRUE(std::filesystem::exists(dir + "/out/report.html"));
  const nlohmann::json record = nlohmann::json::parse(ReadTextFile(dir + "/out/run.json"));
  EXPECT_EQ(record["exit_code"], 3);
  EXPECT_EQ(record["outcome"], "warnings under strict mode");
  EXPECT_TRUE(err.ends_with(
      "paritas: error: strict: every output was written, but the run raised 1 warning (gross "
      "outlier 1); see warnings.csv before publishing\n"))
      << err;
  // Without a warning strict mode passes.
  const std::string clean = MakeTempDir("plaus_strict_clean");
  ASSERT_TRUE(synthetic::WriteSurvey(synthetic::Generate(Options()), clean, &error)) << error;
  EXPECT_EQ(RunCli("compute " + clean + "/config.yaml --strict --output " + clean + "/out", &out,
                   &err),
            0)
      << err;
}

TEST(CheckThresholds, DefaultsAreValidAndBadValuesAreRefused) {
  std::string error;
  EXPECT_TRUE(CheckThresholds().IsValid(&error)) << error;
  CheckThresholds checks;
  checks.min_basket_share = 1.5;
  EXPECT_FALSE(checks.IsValid(&error));
  EXPECT_EQ(error, "checks.min_basket_share must be a share above 0 and at most 1, found 1.5");
  checks = CheckThresholds();
  checks.max_level_ratio = 0.5;
  EXPECT_FALSE(checks.IsValid(&error));
  EXPECT_EQ(error, "checks.max_level_ratio must be a factor above 1, found 0.5");
}

}  // namespace
}  // namespace paritas

namespace paritas {
namespace {

// Writes a two-region survey whose prices.csv repeats line 3 at line 5.
std::string SurveyWithARepeatedRow(const std::string& name, const std::string& policy) {
  const std::string dir = testing::MakeTempDir(name);
  testing::WriteTextFile(dir + "/prices.csv",
                         "region,item,price,heading,outlet\n"
                         "north,a,1.50,bread,o1\nsouth,a,1.80,bread,o2\n"
                         "north,a,1.50,bread,o3\nsouth,a,1.80,bread,o2\n"
                         "north,b,2.00,bread,o1\nsouth,b,2.20,bread,o2\n");
  testing::WriteTextFile(dir + "/expenditure.csv",
                         "region,heading,expenditure\nnorth,bread,1\nsouth,bread,1\n");
  testing::WriteTextFile(dir + "/config.yaml",
                         "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n" +
                             (policy.empty() ? "" : "duplicate_quotes: " + policy + "\n"));
  return dir;
}

// Duplicated quote rows counted as extra quotes without a word; the same
// price at another outlet (line 4) is not a repeat.
TEST(DuplicateQuotes, KeptByDefaultAndNamedWithTheirLines) {
  const std::string dir = SurveyWithARepeatedRow("dup_keep", "");
  std::string out, err;
  ASSERT_EQ(RunCli("compute " + dir + "/config.yaml --no-report --output " + dir + "/out", &out,
                   &err),
            0)
      << err;
  EXPECT_NE(err.find("  duplicate quote rows (1):\n    1 quote row repeats an earlier row field "
                     "for field (the first: " +
                     dir +
                     "/prices.csv:5 repeats line 3); kept as quotes (duplicate_quotes: keep; set "
                     "drop or reject to leave them out)\n"),
            std::string::npos)
      << err;
  EXPECT_NE(out.find("6 quotes"), std::string::npos) << out;
}

TEST(DuplicateQuotes, DropLeavesTheRepeatOutAndTheCountsReconcile) {
  const std::string dir = SurveyWithARepeatedRow("dup_drop", "drop");
  std::string out, err;
  ASSERT_EQ(RunCli("compute " + dir + "/config.yaml --no-report --output " + dir + "/out", &out,
                   &err),
            0)
      << err;
  EXPECT_NE(out.find("5 quotes"), std::string::npos) << out;
  const nlohmann::json record = nlohmann::json::parse(ReadTextFile(dir + "/out/run.json"));
  for (const auto& input : record["inputs"]) {
    if (input["role"] != "prices") continue;
    EXPECT_EQ(input["rows_read"], 6);
    EXPECT_EQ(input["rows_used"], 5);
    EXPECT_EQ(input["rows_rejected"], 1);
  }
  EXPECT_NE(err.find("left out (duplicate_quotes: drop)"), std::string::npos) << err;
}

TEST(DuplicateQuotes, RejectStopsUnderStopWithTheLines) {
  const std::string dir = SurveyWithARepeatedRow("dup_reject", "reject");
  std::string out, err;
  EXPECT_EQ(RunCli("compute " + dir + "/config.yaml --no-report --output " + dir + "/out", &out,
                   &err),
            1);
  EXPECT_NE(err.find(dir + "/prices.csv:5: the row repeats line 3 field for field "
                           "(duplicate_quotes: reject)"),
            std::string::npos)
      << err;
}

}  // namespace
}  // namespace paritas

namespace paritas {
namespace {

// The least-squares screen stays selectable, and the compute summary says
// how many cells nothing checked.
TEST(OutlierFitSetting, LeastSquaresIsSelectableAndUnscreenedCellsAreCounted) {
  const std::string dir = testing::MakeTempDir("fit_setting");
  // Item c is priced in north only: no other region predicts that cell.
  testing::WriteTextFile(dir + "/prices.csv",
                         "region,item,price,heading\n"
                         "north,a,1.5,bread\nsouth,a,1.8,bread\neast,a,1.6,bread\n"
                         "north,b,2.0,bread\nsouth,b,2.3,bread\neast,b,2.1,bread\n"
                         "north,c,4.0,bread\n");
  testing::WriteTextFile(dir + "/expenditure.csv",
                         "region,heading,expenditure\nnorth,bread,1\nsouth,bread,1\neast,bread,1\n");
  testing::WriteTextFile(dir + "/config.yaml",
                         "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n"
                         "outlier_fit: least-squares\n");
  std::string out, err;
  ASSERT_EQ(RunCli("compute " + dir + "/config.yaml --no-report --output " + dir + "/out", &out,
                   &err),
            0)
      << err;
  EXPECT_NE(out.find("not screened: 1 cells no prediction can be formed for (listed in "
                     "outliers.csv); nothing checked them\n"),
            std::string::npos)
      << out;
  const nlohmann::json record = nlohmann::json::parse(ReadTextFile(dir + "/out/run.json"));
  EXPECT_EQ(record["configuration"]["outlier_fit"], "least-squares");
  testing::WriteTextFile(dir + "/config.yaml",
                         "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n"
                         "outlier_fit: least_squares\n");
  EXPECT_EQ(RunCli("check " + dir + "/config.yaml", &out, &err), 1);
  EXPECT_EQ(err, "paritas: error: " + dir +
                     "/config.yaml:4:14: outlier_fit 'least_squares' is not one of: robust, "
                     "least-squares; did you mean 'least-squares'?\n");
}

}  // namespace
}  // namespace paritas
