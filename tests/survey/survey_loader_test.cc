// Tests of the validating survey loader. Each case writes a few small files
// to its own temporary folder and checks the exact message the user sees,
// that rows read = rows used + rows rejected on every file, and that the cell
// table does not depend on how prices.csv is cut into blocks and chunks.
#include "paritas/survey/survey_loader.h"

#include <pthread.h>
#include <sys/stat.h>

#include <algorithm>
#include <cmath>
#include <csignal>
#include <cstdio>
#include <filesystem>
#include <optional>
#include <random>
#include <thread>

#include "base/sha256.h"
#include "survey/cell_prices.h"
#include "test_util.h"

namespace paritas {
namespace {

using ::paritas::testing::MakeTempDir;
using ::paritas::testing::ReadTextFile;
using ::paritas::testing::SourcePath;
using ::paritas::testing::WriteTextFile;

const char kPrices[] =
    "region,item,price,heading\n"
    "north,bread,2.0,food\n"
    "north,milk,1.0,food\n"
    "south,bread,3.0,food\n"
    "south,milk,1.5,food\n";
const char kExpenditure[] =
    "region,heading,expenditure\n"
    "north,food,100\n"
    "south,food,120\n";

// One survey's files in a fresh folder.
struct SurveyDir {
  std::string dir;
  RunConfig config;
  std::string prices() const { return config.survey.prices[0].path; }
  std::string expenditure() const { return config.survey.expenditure; }
  std::string items() const { return dir + "/items.csv"; }
  std::string regions() const { return dir + "/regions.csv"; }
};

// Writes the files given (nullopt = not given) and a configuration naming them.
SurveyDir MakeSurvey(const std::string& name, const std::optional<std::string>& prices,
                        const std::optional<std::string>& expenditure = kExpenditure,
                        const std::optional<std::string>& items = std::nullopt,
                        const std::optional<std::string>& regions = std::nullopt) {
  SurveyDir files;
  files.dir = MakeTempDir("loader_" + name);
  files.config.survey.prices = {PriceSource{files.dir + "/prices.csv", CsvFormat(), {}}};
  files.config.survey.expenditure = files.dir + "/expenditure.csv";
  if (prices) WriteTextFile(files.config.survey.prices[0].path, *prices);
  if (expenditure) WriteTextFile(files.config.survey.expenditure, *expenditure);
  if (items) {
    files.config.survey.items = files.items();
    WriteTextFile(files.items(), *items);
  }
  if (regions) {
    files.config.survey.regions = files.regions();
    WriteTextFile(files.regions(), *regions);
  }
  return files;
}

void UseClassification(const std::string& yaml, RunConfig* config) {
  std::string error;
  ASSERT_TRUE(Classification::FromYaml(yaml, "tree.yaml", &config->classification, &error)) << error;
  config->has_classification = true;
}

void ExpectRowsReconcile(const LoadSummary& summary) {
  int64_t rejected = 0;
  for (const InputFileSummary& file : summary.files) {
    EXPECT_EQ(file.rows_read, file.rows_used + file.rows_rejected) << file.role;
    rejected += file.rows_rejected;
  }
  EXPECT_EQ(rejected, summary.num_rows_rejected);
}

// Loads and returns the summary; checks the row accounting whatever happens.
LoadSummary Load(const RunConfig& config, Survey* survey, LoadOptions options = LoadOptions()) {
  LoadSummary summary;
  const bool ok = LoadSurvey(config, options, survey, &summary);
  EXPECT_EQ(ok, summary.outcome == LoadOutcome::kOk);
  ExpectRowsReconcile(summary);
  return summary;
}

// Loads with invalid rows skipped (and counted) rather than stopping the load.
LoadSummary LoadSkipping(const RunConfig& config, Survey* survey) {
  LoadOptions options;
  options.invalid_rows = InvalidRowPolicy::kSkip;
  return Load(config, survey, options);
}

// Loads under `invalid_rows: stop` and returns the one message the user sees
// for a single bad row: the row's reason.
std::string FirstRejection(const SurveyDir& files) {
  Survey survey;
  const LoadSummary summary = Load(files.config, &survey);
  EXPECT_EQ(summary.outcome, LoadOutcome::kInvalidInput);
  if (summary.rejected_rows.empty()) return "no rejected row; message: " + summary.message;
  // Rows of rejected regions and items are counted apart (see
  // StopCountsRowsOfARejectedRegionApartInItsMessage).
  const int64_t own = summary.num_rows_rejected - summary.num_rows_rejected_by_cascade;
  std::string expected = std::to_string(own) + " invalid row" + (own == 1 ? "" : "s");
  if (summary.num_rows_rejected_by_cascade > 0) {
    expected += ", " + std::to_string(summary.num_rows_rejected_by_cascade) +
                " rows of rejected regions or items";
  }
  EXPECT_EQ(summary.message, expected + "; fix them, or set invalid_rows: skip to leave them out");
  return summary.rejected_rows.front().reason;
}

std::string LoadMessage(const SurveyDir& files) {
  Survey survey;
  const LoadSummary summary = Load(files.config, &survey);
  EXPECT_EQ(summary.outcome, LoadOutcome::kInvalidInput);
  return summary.message;
}

const InputFileSummary& FileOf(const LoadSummary& summary, const std::string& role) {
  for (const InputFileSummary& file : summary.files) {
    if (file.role == role) return file;
  }
  ADD_FAILURE() << "no file " << role;
  return summary.files.front();
}

// ---------------------------------------------------------------------------
// A valid survey.

TEST(LoadSurvey, ReadsAValidSurveyIntoCells) {
  const SurveyDir files = MakeSurvey("valid", kPrices);
  Survey survey;
  const LoadSummary summary = Load(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(summary.message, "ok");
  EXPECT_EQ(survey.regions.Codes(), (std::vector<std::string>{"north", "south"}));
  EXPECT_EQ(survey.items.Codes(), (std::vector<std::string>{"bread", "milk"}));
  EXPECT_EQ(survey.heading_codes, std::vector<std::string>{"food"});
  EXPECT_EQ(survey.num_quotes, 4);
  ASSERT_EQ(survey.cells.size(), 4u);
  // Sorted by item, then region.
  EXPECT_EQ(survey.cells.item, (std::vector<int32_t>{0, 0, 1, 1}));
  EXPECT_EQ(survey.cells.region, (std::vector<int32_t>{0, 1, 0, 1}));
  PARITAS_EXPECT_CLOSE(survey.cells.log_price[1], std::log(3.0), 1e-15);
  EXPECT_EQ(survey.expenditure(1, 0), 120.0);
  EXPECT_EQ(FileOf(summary, "prices").rows_read, 4);
  EXPECT_EQ(FileOf(summary, "prices").size_bytes, static_cast<int64_t>(std::string(kPrices).size()));
  EXPECT_EQ(FileOf(summary, "prices").sha256.size(), 64u);
  EXPECT_EQ(summary.BriefReport(), "read 4 quotes; 0 rows rejected");
}

TEST(LoadOptions, DefaultsAreValid) {
  std::string error;
  EXPECT_TRUE(LoadOptions().IsValid(&error)) << error;
  LoadOptions options;
  options.block_bytes = 0;
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "block_bytes must be positive");
  options = LoadOptions();
  options.chunk_bytes = 0;
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "chunk_bytes must be positive");
}

TEST(LoadSurvey, ComputesGeometricMeanCountSdMinAndMaxPerCell) {
  // Quotes 1, 2, 4 and 8: ln values 0, ln2, 2 ln2, 3 ln2; geometric mean
  // sqrt(8) = 2.828...; sample sd of the logs ln2 * sd(0,1,2,3) = ln2 * 1.2910
  // (numpy: np.std(np.log([1,2,4,8]), ddof=1) = 0.8948491622597644).
  const SurveyDir files = MakeSurvey("moments",
                                        "region,item,price,heading,representative\n"
                                        "north,bread,1,food,0\n"
                                        "north,bread,2,food,no\n"
                                        "north,bread,4,food,\n"
                                        "north,bread,8,food,false\n"
                                        "south,bread,3,food,0\n"
                                        "south,bread,3,food,yes\n");
  Survey survey;
  const LoadSummary summary = Load(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  ASSERT_EQ(survey.cells.size(), 2u);
  PARITAS_EXPECT_CLOSE(std::exp(survey.cells.log_price[0]), std::sqrt(8.0), 1e-14);
  EXPECT_EQ(survey.cells.num_quotes[0], 4);
  PARITAS_EXPECT_CLOSE(survey.cells.log_sd[0], 0.8948491622597644, 1e-14);
  EXPECT_EQ(survey.cells.log_min[0], 0.0);
  PARITAS_EXPECT_CLOSE(survey.cells.log_max[0], std::log(8.0), 1e-15);
  EXPECT_EQ(survey.cells.representative[0], 0);
  // South: one quote flagged makes the cell representative; equal quotes have sd 0.
  EXPECT_EQ(survey.cells.num_quotes[1], 2);
  EXPECT_EQ(survey.cells.log_sd[1], 0.0);
  EXPECT_EQ(survey.cells.representative[1], 1);
  PARITAS_EXPECT_CLOSE(survey.cells.log_price[1], std::log(3.0), 1e-15);
}

TEST(LoadSurvey, GivesASingleQuoteCellZeroSd) {
  const SurveyDir files = MakeSurvey("single_quote", kPrices);
  Survey survey;
  ASSERT_EQ(Load(files.config, &survey).outcome, LoadOutcome::kOk);
  for (double sd : survey.cells.log_sd) EXPECT_EQ(sd, 0.0);
  for (int32_t n : survey.cells.num_quotes) EXPECT_EQ(n, 1);
}

TEST(LoadSurvey, KeepsRegionsCsvOrderAndSortsItemsByHeadingThenCode) {
  const SurveyDir files = MakeSurvey("order",
                                        "region,item,price\n"
                                        "north,zebra_cake,2\n"
                                        "south,apple,1\n"
                                        "north,apple,1\n"
                                        "south,rent,500\n",
                                        "region,heading,expenditure\nsouth,food,1\nnorth,housing,2\n",
                                        "item,heading\nrent,housing\nzebra_cake,food\napple,food\n",
                                        "region,name,population\nsouth,South Land,10\nnorth,North Land,\n");
  Survey survey;
  const LoadSummary summary = Load(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(survey.regions.Codes(), (std::vector<std::string>{"south", "north"}));
  EXPECT_EQ(survey.region_name, (std::vector<std::string>{"South Land", "North Land"}));
  EXPECT_EQ(survey.region_population[0], 10.0);
  EXPECT_TRUE(std::isnan(survey.region_population[1]));
  EXPECT_TRUE(survey.has_population);
  // Default classification: root `all` holding every heading, sorted.
  EXPECT_EQ(survey.classification.NodeCodes(), (std::vector<std::string>{"all", "food", "housing"}));
  EXPECT_EQ(survey.items.Codes(), (std::vector<std::string>{"apple", "zebra_cake", "rent"}));
  EXPECT_EQ(survey.item_heading, (std::vector<int>{0, 0, 1}));
  EXPECT_EQ(survey.heading_range[0].item_begin, 0);
  EXPECT_EQ(survey.heading_range[0].item_end, 2);
  EXPECT_EQ(survey.heading_range[1].num_cells(), 1);
  EXPECT_EQ(survey.expenditure(0, 0), 1.0);
  EXPECT_TRUE(std::isnan(survey.expenditure(0, 1)));  // No row: NaN.
  EXPECT_EQ(survey.expenditure(1, 1), 2.0);
}

TEST(LoadSurvey, UsesTheClassificationOrderForHeadings) {
  SurveyDir files = MakeSurvey("classification_order",
                                  "region,item,price,heading\nnorth,rent,5,housing\nnorth,bread,1,food\n"
                                  "south,rent,6,housing\nsouth,bread,2,food\n");
  UseClassification("all:\n  housing_group: [housing]\n  food_group: [food, drink]\n", &files.config);
  Survey survey;
  const LoadSummary summary = Load(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(survey.heading_codes, (std::vector<std::string>{"housing", "food", "drink"}));
  EXPECT_EQ(survey.items.Codes(), (std::vector<std::string>{"rent", "bread"}));
  EXPECT_EQ(survey.heading_range[2].num_items(), 0);
  EXPECT_EQ(survey.classification.nodes().size(), 6u);
}

// ---------------------------------------------------------------------------
// File-level problems.

TEST(LoadSurvey, ReportsAMissingPricesFile) {
  const SurveyDir files = MakeSurvey("missing_prices", std::nullopt);
  EXPECT_EQ(LoadMessage(files), files.prices() + ": cannot open file: No such file or directory");
}

TEST(LoadSurvey, ReportsAMissingExpenditureFile) {
  const SurveyDir files = MakeSurvey("missing_expenditure", kPrices, std::nullopt);
  EXPECT_EQ(LoadMessage(files), files.expenditure() + ": cannot open file: No such file or directory");
}

TEST(LoadSurvey, ReportsMissingItemsAndRegionsFiles) {
  SurveyDir files = MakeSurvey("missing_items", kPrices);
  files.config.survey.items = files.items();
  EXPECT_EQ(LoadMessage(files), files.items() + ": cannot open file: No such file or directory");
  files.config.survey.items.clear();
  files.config.survey.regions = files.regions();
  EXPECT_EQ(LoadMessage(files), files.regions() + ": cannot open file: No such file or directory");
}

TEST(LoadSurvey, ReportsAnEmptyPricesFile) {
  const SurveyDir files = MakeSurvey("empty_prices", "");
  EXPECT_EQ(LoadMessage(files),
            files.prices() + ": file is empty (expected a header row with columns region, item, price)");
}

TEST(LoadSurvey, ReportsAPricesFileWithOnlyAHeader) {
  const SurveyDir files = MakeSurvey("header_only", "region,item,price,heading\n");
  EXPECT_EQ(LoadMessage(files), files.prices() + ": no data rows (only a header)");
  const SurveyDir no_newline = MakeSurvey("header_only_no_newline", "region,item,price,heading");
  EXPECT_EQ(LoadMessage(no_newline), no_newline.prices() + ": no data rows (only a header)");
}

TEST(LoadSurvey, ReportsAnExpenditureFileWithOnlyAHeaderOrNothing) {
  const SurveyDir header = MakeSurvey("expenditure_header_only", kPrices, "region,heading,expenditure\n");
  EXPECT_EQ(LoadMessage(header), header.expenditure() + ": no data rows (only a header)");
  const SurveyDir empty = MakeSurvey("expenditure_empty", kPrices, "");
  EXPECT_EQ(LoadMessage(empty), empty.expenditure() +
                                    ": file is empty (expected a header row with columns region, heading, "
                                    "expenditure; or heading, expenditure for national weights)");
}

TEST(LoadSurvey, ReadsAnExpenditureFileWithoutRegionsAsNationalWeights) {
  const SurveyDir files = MakeSurvey("expenditure_national", kPrices,
                                     "heading,expenditure\nfood,60\nfood,50\n");
  EXPECT_EQ(FirstRejection(files),
            files.expenditure() + ":3:1: duplicate row for heading 'food' (first at line 2)");
  const SurveyDir good = MakeSurvey("expenditure_national_ok", kPrices,
                                    "heading,expenditure\nfood,60\n");
  Survey survey;
  ASSERT_EQ(Load(good.config, &survey).outcome, LoadOutcome::kOk);
  EXPECT_TRUE(survey.national_weights);
  for (int r = 0; r < survey.num_regions(); ++r) EXPECT_EQ(survey.expenditure(r, 0), 60.0);
}

TEST(LoadSurvey, ReportsAMissingColumnListingTheColumnsFound) {
  const SurveyDir files = MakeSurvey("missing_column", "region,item,cost,heading\nnorth,bread,2,food\n");
  EXPECT_EQ(LoadMessage(files), files.prices() + ":1: missing column 'price' (found: region, item, cost, heading)");
  const SurveyDir spending = MakeSurvey("missing_expenditure_column", kPrices, "region,heading\nnorth,food\n");
  EXPECT_EQ(LoadMessage(spending),
            spending.expenditure() + ":1: missing column 'expenditure' (found: region, heading)");
}

TEST(LoadSurvey, ReportsADuplicatedColumn) {
  const SurveyDir files =
      MakeSurvey("duplicate_column", "region,item,price,heading,price\nnorth,bread,2,food,3\n");
  EXPECT_EQ(LoadMessage(files), files.prices() + ":1: column 'price' appears more than once");
  const SurveyDir items = MakeSurvey("duplicate_items_column", kPrices, kExpenditure,
                                        "item,heading,item\nbread,food,bread\n");
  EXPECT_EQ(LoadMessage(items), items.items() + ":1: column 'item' appears more than once");
}

TEST(LoadSurvey, RequiresAHeadingColumnOrAnItemsFile) {
  const SurveyDir files = MakeSurvey("no_heading", "region,item,price\nnorth,bread,2\n");
  EXPECT_EQ(LoadMessage(files), files.prices() +
                                    ":1: no column 'heading' and no items file (survey.items) to give each "
                                    "item's heading");
}

// ---------------------------------------------------------------------------
// Row-level problems: each names file, line and column, the value and the rule.

TEST(LoadSurvey, RejectsANonPositivePrice) {
  const SurveyDir files = MakeSurvey("negative_price", std::string(kPrices) + "south,eggs,-4.10,food\n");
  EXPECT_EQ(FirstRejection(files), files.prices() + ":6:3: price '-4.10' is not a positive number");
  const SurveyDir zero = MakeSurvey("zero_price", std::string(kPrices) + "south,eggs,0,food\n");
  EXPECT_EQ(FirstRejection(zero), zero.prices() + ":6:3: price '0' is not a positive number");
}

TEST(LoadSurvey, RejectsAnUnparsablePrice) {
  const SurveyDir files = MakeSurvey("bad_price", std::string(kPrices) + "south,eggs,4.1o,food\n");
  EXPECT_EQ(FirstRejection(files), files.prices() + ":6:3: price '4.1o' is not a number");
  const SurveyDir empty = MakeSurvey("empty_price", std::string(kPrices) + "south,eggs,,food\n");
  EXPECT_EQ(FirstRejection(empty), empty.prices() + ":6:3: price is empty");
}

TEST(LoadSurvey, RejectsANonFinitePrice) {
  const SurveyDir files = MakeSurvey("inf_price", std::string(kPrices) + "south,eggs,inf,food\n");
  EXPECT_EQ(FirstRejection(files), files.prices() + ":6:3: price 'inf' is not a finite number");
  const SurveyDir nan = MakeSurvey("nan_price", std::string(kPrices) + "south,eggs,NaN,food\n");
  EXPECT_EQ(FirstRejection(nan), nan.prices() + ":6:3: price 'NaN' is not a finite number");
}

// 1e-400 is finite but beyond what a double holds: it used to be called
// "not a finite number".
TEST(LoadSurvey, RejectsANumberOutsideTheRangeOfNumbers) {
  const SurveyDir tiny =
      MakeSurvey("tiny_price", std::string(kPrices) + "south,eggs,1e-400,food\n");
  EXPECT_EQ(FirstRejection(tiny), tiny.prices() +
                                      ":6:3: price '1e-400' is outside the range of "
                                      "numbers (underflow: nearer to zero than 4.9e-324)");
  const SurveyDir huge = MakeSurvey("huge_price", std::string(kPrices) + "south,eggs,1e999,food\n");
  EXPECT_EQ(FirstRejection(huge), huge.prices() +
                                      ":6:3: price '1e999' is outside the range of "
                                      "numbers (overflow: beyond 1.8e308)");
  const SurveyDir expenditure =
      MakeSurvey("tiny_expenditure", kPrices, std::string(kExpenditure) + "east,food,-0.1e-999\n");
  EXPECT_EQ(FirstRejection(expenditure),
            expenditure.expenditure() +
                ":4:3: expenditure '-0.1e-999' is outside the range of "
                "numbers (underflow: nearer to zero than 4.9e-324)");
}

TEST(LoadSurvey, RejectsABadRepresentativeFlag) {
  const SurveyDir files = MakeSurvey("bad_flag", "region,item,price,heading,representative\n"
                                                    "north,bread,2,food,1\nsouth,bread,2,food,maybe\n");
  EXPECT_EQ(FirstRejection(files),
            files.prices() + ":3:5: representative 'maybe' is not one of 1/0, yes/no, true/false");
}

TEST(LoadSurvey, RejectsEmptyCodes) {
  const SurveyDir region = MakeSurvey("empty_region", std::string(kPrices) + " ,eggs,1,food\n");
  EXPECT_EQ(FirstRejection(region), region.prices() + ":6:1: region is empty");
  const SurveyDir item = MakeSurvey("empty_item", std::string(kPrices) + "south,,1,food\n");
  EXPECT_EQ(FirstRejection(item), item.prices() + ":6:2: item is empty");
  const SurveyDir heading = MakeSurvey("empty_heading", std::string(kPrices) + "south,eggs,1,\n");
  EXPECT_EQ(FirstRejection(heading), heading.prices() + ":6:4: heading is empty");
  const SurveyDir spending = MakeSurvey("empty_expenditure_heading", kPrices,
                                           std::string(kExpenditure) + "south,,5\n");
  EXPECT_EQ(FirstRejection(spending), spending.expenditure() + ":4:2: heading is empty");
  const SurveyDir catalog = MakeSurvey("empty_catalog_item", kPrices, kExpenditure,
                                          "item,heading\nbread,food\n,food\nmilk,food\n");
  EXPECT_EQ(FirstRejection(catalog), catalog.items() + ":3:1: item is empty");
}

TEST(LoadSurvey, RejectsATooLongCode) {
  const std::string code(201, 'x');
  const SurveyDir files = MakeSurvey("long_code", std::string(kPrices) + code + ",bread,1,food\n");
  EXPECT_EQ(FirstRejection(files), files.prices() + ":6:1: region '" + std::string(60, 'x') +
                                       "...' is longer than 200 characters");
}

TEST(LoadSurvey, RejectsARowWithTheWrongNumberOfFields) {
  const SurveyDir files = MakeSurvey("field_count", std::string(kPrices) + "south,eggs,1\n");
  // The column is the first one missing, or the first one too many.
  EXPECT_EQ(FirstRejection(files), files.prices() + ":6:4: row has 3 fields, the header has 4");
  const SurveyDir one = MakeSurvey("field_count_one", std::string(kPrices) + "south\n");
  EXPECT_EQ(FirstRejection(one), one.prices() + ":6:2: row has 1 field, the header has 4");
  const SurveyDir many =
      MakeSurvey("field_count_many", std::string(kPrices) + "south,eggs,1,food,x,y\n");
  EXPECT_EQ(FirstRejection(many), many.prices() + ":6:5: row has 6 fields, the header has 4");
  const SurveyDir regions = MakeSurvey("field_count_regions", kPrices, kExpenditure, std::nullopt,
                                       "region,name\nnorth,North,extra\nsouth,South\n");
  EXPECT_EQ(FirstRejection(regions),
            regions.regions() + ":2:3: row has 3 fields, the header has 2");
}

TEST(LoadSurvey, RejectsANegativeOrBadExpenditure) {
  const SurveyDir negative = MakeSurvey("negative_expenditure", kPrices, std::string(kExpenditure) + "east,food,-5\n");
  EXPECT_EQ(FirstRejection(negative), negative.expenditure() + ":4:3: expenditure '-5' is negative");
  const SurveyDir bad = MakeSurvey("bad_expenditure", kPrices, std::string(kExpenditure) + "east,food,lots\n");
  EXPECT_EQ(FirstRejection(bad), bad.expenditure() + ":4:3: expenditure 'lots' is not a number");
  const SurveyDir inf = MakeSurvey("inf_expenditure", kPrices, std::string(kExpenditure) + "east,food,inf\n");
  EXPECT_EQ(FirstRejection(inf), inf.expenditure() + ":4:3: expenditure 'inf' is not a finite number");
}

// An expenditure of 1e307 in each of two headings sums to infinity (beyond
// the largest double, about 1.797e308, IEEE 754): the run used to stop with
// "not linked", or overflow sums of spending later. Such figures, and
// positive ones too small to divide without losing digits, are refused.
TEST(LoadSurvey, RejectsFiguresBeyondWhatSumsAndRatiosHold) {
  const SurveyDir large = MakeSurvey("large_expenditure", kPrices, std::string(kExpenditure) + "east,food,1e307\n");
  EXPECT_EQ(FirstRejection(large),
            large.expenditure() +
                ":4:3: expenditure '1e307' is beyond 1e30, "
                "where ratios between regions and their products overflow or lose digits; state it in larger units");
  const SurveyDir tiny = MakeSurvey("tiny_expenditure", kPrices, std::string(kExpenditure) + "east,food,1e-101\n");
  EXPECT_EQ(FirstRejection(tiny),
            tiny.expenditure() +
                ":4:3: expenditure '1e-101' is positive but nearer 0 than 1e-30, "
                "where ratios between regions and their products overflow or lose digits; state it in smaller units");
  const SurveyDir edge = MakeSurvey("edge_expenditure", kPrices,
                                    "region,heading,expenditure\nnorth,food,1e30\nsouth,food,1e-30\n");
  Survey survey;
  ASSERT_EQ(Load(edge.config, &survey).outcome, LoadOutcome::kOk);
  EXPECT_EQ(survey.expenditure(0, 0), 1e30);
  // Prices, quote weights and reference quantities alike (a price of 1e-300
  // times 1e10 made a ratio of inf in outliers.csv).
  const SurveyDir price = MakeSurvey("large_price", std::string(kPrices) + "south,tea,1e101,food\n");
  EXPECT_EQ(FirstRejection(price),
            price.prices() +
                ":6:3: price '1e101' is beyond 1e30, "
                "where ratios between regions and their products overflow or lose digits; state it in larger units");
  const SurveyDir weight = MakeSurvey("tiny_weight",
                                      "region,item,price,heading,weight\nnorth,bread,2.0,food,1\n"
                                      "south,bread,3.0,food,1e-300\n");
  EXPECT_EQ(FirstRejection(weight),
            weight.prices() +
                ":3:5: weight '1e-300' is positive but nearer 0 than 1e-30, "
                "where ratios between regions and their products overflow or lose digits; state it in smaller units");
  const SurveyDir quantity = MakeSurvey("tiny_reference_quantity", kPrices, kExpenditure,
                                        "item,heading,reference_quantity\nbread,food,4.9e-324\n"
                                        "milk,food,1\n");
  EXPECT_EQ(FirstRejection(quantity),
            quantity.items() +
                ":2:3: reference_quantity '4.9e-324' is positive but nearer 0 than 1e-30, "
                "where ratios between regions and their products overflow or lose digits; state it in smaller units");
  const SurveyDir population = MakeSurvey("large_population", kPrices, kExpenditure, std::nullopt,
                                          "region,population\nnorth,1e308\nsouth,6\n");
  EXPECT_EQ(FirstRejection(population),
            population.regions() +
                ":2:2: population '1e308' is beyond 1e30, "
                "where ratios between regions and their products overflow or lose digits; state it in larger units");
}

TEST(LoadSurvey, AcceptsZeroExpenditure) {
  const SurveyDir files = MakeSurvey("zero_expenditure", kPrices, "region,heading,expenditure\nnorth,food,0\n");
  Survey survey;
  ASSERT_EQ(Load(files.config, &survey).outcome, LoadOutcome::kOk);
  EXPECT_EQ(survey.expenditure(0, 0), 0.0);
  EXPECT_FALSE(std::signbit(survey.expenditure(0, 0)));
}

TEST(LoadSurvey, RejectsDuplicatedExpenditureRows) {
  const SurveyDir files = MakeSurvey("duplicate_expenditure", kPrices,
                                        std::string(kExpenditure) + "north, food ,50\n");
  EXPECT_EQ(FirstRejection(files),
            files.expenditure() +
                ":4:1: duplicate row for region 'north' and heading 'food' (first at line 2)");
}

// Pairs of a region or heading first named in expenditure.csv (kept apart
// from the pairs known when the file is opened) are checked the same way.
TEST(LoadSurvey, RejectsDuplicatedExpenditureRowsOfCodesFirstNamedThere) {
  const SurveyDir heading = MakeSurvey("duplicate_new_heading", kPrices,
                                       std::string(kExpenditure) + "north,rent,7\nnorth,rent,8\n");
  EXPECT_EQ(FirstRejection(heading),
            heading.expenditure() + ":5:1: duplicate row for region 'north' and heading 'rent' (first at line 4)");
  const SurveyDir region = MakeSurvey("duplicate_new_region", kPrices,
                                      std::string(kExpenditure) + "east,food,7\neast,food,8\n");
  EXPECT_EQ(FirstRejection(region),
            region.expenditure() + ":5:1: duplicate row for region 'east' and heading 'food' (first at line 4)");
}

TEST(LoadSurvey, RejectsAnItemFiledUnderTwoHeadingsInItemsCsv) {
  const SurveyDir files = MakeSurvey("items_two_headings", "region,item,price\nnorth,bread,2\nsouth,bread,3\n",
                                        kExpenditure, "item,heading\nbread,food\nmilk,food\nbread,bakery\n");
  EXPECT_EQ(FirstRejection(files),
            files.items() + ":4:2: item 'bread' is filed under heading 'bakery' but under 'food' at line 2");
}

TEST(LoadSurvey, RejectsAnItemListedTwiceInItemsCsv) {
  const SurveyDir files = MakeSurvey("items_twice", "region,item,price\nnorth,bread,2\n", kExpenditure,
                                        "item,heading\nbread,food\nbread,food\n");
  EXPECT_EQ(FirstRejection(files), files.items() + ":3:1: item 'bread' is listed twice (first at line 2)");
}

TEST(LoadSurvey, RejectsAnItemWhosePricesHeadingDiffersFromItemsCsv) {
  const SurveyDir files = MakeSurvey("prices_vs_items", std::string(kPrices) + "south,milk,1.4,dairy\n",
                                        kExpenditure, "item,heading\nbread,food\nmilk,food\n");
  EXPECT_EQ(FirstRejection(files), files.prices() + ":6:4: item 'milk' is filed under heading 'dairy' but under "
                                                    "'food' at " + files.items() + ":3");
}

TEST(LoadSurvey, RejectsAnItemFiledUnderTwoHeadingsWithinPricesCsv) {
  const SurveyDir files = MakeSurvey("prices_two_headings", std::string(kPrices) + "south,milk,1.4,dairy\n");
  EXPECT_EQ(FirstRejection(files),
            files.prices() + ":6:4: item 'milk' is filed under heading 'dairy' but under 'food' at line 3");
}

TEST(LoadSurvey, RejectsAnItemMissingFromItemsCsvWhenPricesHaveNoHeading) {
  const SurveyDir files = MakeSurvey("item_not_in_catalog", "region,item,price\nnorth,bread,2\nnorth,cake,3\n",
                                        kExpenditure, "item,heading\nbread,food\n");
  EXPECT_EQ(FirstRejection(files), files.prices() + ":3:2: item 'cake' is not in " + files.items());
}

TEST(LoadSurvey, AcceptsAnEmptyHeadingForAnItemWhoseHeadingIsKnown) {
  const SurveyDir files = MakeSurvey("empty_heading_known", std::string(kPrices) + "east,milk,1.2,\n",
                                        kExpenditure, "item,heading\nbread,food\nmilk,food\n");
  Survey survey;
  ASSERT_EQ(Load(files.config, &survey).outcome, LoadOutcome::kOk);
  EXPECT_EQ(survey.num_quotes, 5);
}

TEST(LoadSurvey, RejectsAHeadingAbsentFromTheClassification) {
  SurveyDir files = MakeSurvey("heading_not_in_tree", std::string(kPrices) + "south,ball,9,toys\n");
  UseClassification("all: [food]\n", &files.config);
  EXPECT_EQ(FirstRejection(files), files.prices() + ":6:4: heading 'toys' is not in the classification");

  SurveyDir items = MakeSurvey("items_heading_not_in_tree", "region,item,price\nnorth,bread,2\n", kExpenditure,
                                  "item,heading\nbread,food\nball,toys\n");
  UseClassification("all: [food]\n", &items.config);
  EXPECT_EQ(FirstRejection(items), items.items() + ":3:2: heading 'toys' is not in the classification");

  SurveyDir spending = MakeSurvey("expenditure_heading_not_in_tree", kPrices,
                                     std::string(kExpenditure) + "north,toys,5\n");
  UseClassification("all: [food]\n", &spending.config);
  EXPECT_EQ(FirstRejection(spending), spending.expenditure() + ":4:2: heading 'toys' is not in the classification");
}

TEST(LoadSurvey, RejectsRegionsMissingFromRegionsCsv) {
  const SurveyDir files = MakeSurvey("region_not_listed", std::string(kPrices) + "east,bread,2,food\n",
                                        kExpenditure, std::nullopt, "region\nnorth\nsouth\n");
  EXPECT_EQ(FirstRejection(files), files.prices() + ":6:1: region 'east' is not in " + files.regions());
  const SurveyDir spending = MakeSurvey("expenditure_region_not_listed", kPrices,
                                           std::string(kExpenditure) + "west,food,5\n", std::nullopt,
                                           "region\nnorth\nsouth\n");
  EXPECT_EQ(FirstRejection(spending), spending.expenditure() + ":4:1: region 'west' is not in " + spending.regions());
}

TEST(LoadSurvey, RejectsBadRowsOfRegionsCsv) {
  const SurveyDir twice = MakeSurvey("regions_twice", kPrices, kExpenditure, std::nullopt,
                                        "region,population\nnorth,5\nsouth,6\nnorth,7\n");
  EXPECT_EQ(FirstRejection(twice), twice.regions() + ":4:1: region 'north' is listed twice (first at line 2)");
  const SurveyDir population = MakeSurvey("regions_population", kPrices, kExpenditure, std::nullopt,
                                             "region,population\nnorth,-5\nsouth,6\n");
  EXPECT_EQ(FirstRejection(population), population.regions() + ":2:2: population '-5' is negative");
}

// ---------------------------------------------------------------------------
// invalid_rows: stop and skip.

std::string PricesWithBadRows(int num_bad) {
  std::string text = kPrices;
  for (int k = 0; k < num_bad; ++k) text += "south,item" + std::to_string(k) + ",-1,food\n";
  return text;
}

TEST(LoadSurvey, StopReportsTheFirstTwentyBadRowsAndCountsThemAll) {
  const SurveyDir files = MakeSurvey("stop_25", PricesWithBadRows(25));
  Survey survey;
  const LoadSummary summary = Load(files.config, &survey);
  EXPECT_EQ(summary.outcome, LoadOutcome::kInvalidInput);
  EXPECT_EQ(summary.num_rows_rejected, 25);
  ASSERT_EQ(summary.rejected_rows.size(), 20u);
  EXPECT_EQ(summary.rejected_rows.front().reason, files.prices() + ":6:3: price '-1' is not a positive number");
  EXPECT_EQ(summary.rejected_rows.back().line, 25);
  EXPECT_EQ(summary.message,
            "25 invalid rows (the first 20 shown); fix them, or set invalid_rows: skip to leave them out");
  EXPECT_EQ(FileOf(summary, "prices").rows_read, 29);
  EXPECT_EQ(FileOf(summary, "prices").rows_rejected, 25);
}

TEST(LoadSurvey, StopCountsBadRowsAcrossFilesInFileOrder) {
  const SurveyDir files = MakeSurvey("stop_files", std::string(kPrices) + "south,eggs,x,food\n",
                                        std::string(kExpenditure) + "east,food,-1\n");
  Survey survey;
  const LoadSummary summary = Load(files.config, &survey);
  ASSERT_EQ(summary.rejected_rows.size(), 2u);
  EXPECT_EQ(summary.rejected_rows[0].file, files.prices());
  EXPECT_EQ(summary.rejected_rows[1].file, files.expenditure());
  EXPECT_EQ(summary.message, "2 invalid rows; fix them, or set invalid_rows: skip to leave them out");
}

TEST(LoadSurvey, SkipGoesOnWithoutBadRowsAndKeepsEveryOne) {
  const SurveyDir files = MakeSurvey("skip_25", PricesWithBadRows(25),
                                        std::string(kExpenditure) + "east,food,-1\n");
  Survey survey;
  const LoadSummary summary = LoadSkipping(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(summary.num_rows_rejected, 26);
  EXPECT_EQ(summary.rejected_rows.size(), 26u);
  EXPECT_EQ(survey.num_quotes, 4);
  EXPECT_EQ(survey.num_items(), 2);  // Items whose every row was rejected are left out.
  EXPECT_EQ(FileOf(summary, "prices").rows_used, 4);
  EXPECT_EQ(FileOf(summary, "expenditure").rows_rejected, 1);
  EXPECT_EQ(summary.BriefReport(), "read 4 quotes; 26 rows rejected");
}

TEST(LoadSurvey, SkipDoesNotLetARejectedRowFileAnItemUnderItsHeading) {
  // Row 6 is rejected for its price; its heading must not conflict with row 7.
  const SurveyDir files = MakeSurvey("skip_no_filing",
                                        std::string(kPrices) + "south,eggs,-1,dairy\nsouth,eggs,2,food\n");
  Survey survey;
  const LoadSummary summary = LoadSkipping(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  ASSERT_EQ(summary.rejected_rows.size(), 1u);
  EXPECT_EQ(summary.rejected_rows[0].reason, files.prices() + ":6:3: price '-1' is not a positive number");
  EXPECT_EQ(survey.heading_codes, std::vector<std::string>{"food"});
  EXPECT_EQ(survey.num_quotes, 5);
}

TEST(RejectedRowsCsv, ListsFileLineReasonAndRawText) {
  const SurveyDir files = MakeSurvey("rejected_csv", std::string(kPrices) + "south,\"eggs, large\",-4.10,food\n");
  Survey survey;
  const LoadSummary summary = LoadSkipping(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  ASSERT_EQ(summary.rejected_rows.size(), 1u);
  EXPECT_EQ(RejectedRowsCsv(summary.rejected_rows),
            "file,line,reason,raw\n" + files.prices() + ",6," + files.prices() +
                ":6:3: price '-4.10' is not a positive number,\"south,\"\"eggs, large\"\",-4.10,food\"\n");
}

TEST(LoadSurvey, SkipFailsWhenEveryQuoteIsRejected) {
  const SurveyDir files = MakeSurvey("skip_all", "region,item,price,heading\nnorth,bread,-1,food\n");
  Survey survey;
  const LoadSummary summary = LoadSkipping(files.config, &survey);
  EXPECT_EQ(summary.outcome, LoadOutcome::kInvalidInput);
  EXPECT_EQ(summary.message, files.prices() + ": no usable price quotes (all 1 rows rejected)");
}

// ---------------------------------------------------------------------------
// CSV-level cases through the loader.

TEST(LoadSurvey, ReadsQuotedFieldsCrlfBomBlankLinesAndNoFinalNewline) {
  const SurveyDir files = MakeSurvey("csv_forms",
                                        "\xEF\xBB\xBFheading,price,note,region,item\r\n"
                                        "food,2.0,\"sold by the loaf, sliced\",north,bread\r\n"
                                        "\r\n"
                                        "\n"
                                        "\"food\",\"3.0\",\"two\nlines\",\"south\",bread\r\n"
                                        "food,1.0,\"say \"\"hi\"\"\",north,milk",
                                        "region,heading,expenditure\r\nnorth,food,1\r\nsouth,food,2");
  Survey survey;
  const LoadSummary summary = Load(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(FileOf(summary, "prices").rows_read, 3);  // Blank lines are not rows.
  EXPECT_EQ(FileOf(summary, "prices").ignored_columns, std::vector<std::string>{"note"});
  EXPECT_EQ(survey.regions.Codes(), (std::vector<std::string>{"north", "south"}));
  EXPECT_EQ(survey.items.Codes(), (std::vector<std::string>{"bread", "milk"}));
  ASSERT_EQ(survey.cells.size(), 3u);
  PARITAS_EXPECT_CLOSE(survey.cells.log_price[1], std::log(3.0), 1e-15);
  EXPECT_EQ(survey.expenditure(1, 0), 2.0);
}

// A blank first line used to end the header search early: the block then
// held no whole record and the file was called empty.
TEST(LoadSurvey, ReadsAHeaderLongerThanABlockAfterABlankLine) {
  std::string header = "region,item,price,heading";
  for (int c = 0; c < 10000; ++c) header += ",column" + std::to_string(c);
  const std::string commas(10000, ',');
  const SurveyDir files =
      MakeSurvey("blank_long_header", "\n" + header + "\nnorth,bread,2,food" + commas +
                                          "\nsouth,bread,3,food" + commas + "\n");
  Survey survey;
  LoadOptions options;
  options.block_bytes = 1 << 16;  // The header is about 120 KiB.
  const LoadSummary summary = Load(files.config, &survey, options);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(FileOf(summary, "prices").rows_used, 2);
  EXPECT_EQ(FileOf(summary, "prices").ignored_columns.size(), 10000u);
}

TEST(LoadSurvey, NamesTheLineAfterAQuotedNewline) {
  const SurveyDir files = MakeSurvey("line_after_newline",
                                        "region,item,note,price,heading\n"
                                        "north,bread,\"a\nb\nc\",2,food\n"
                                        "south,bread,x,-3,food\n");
  EXPECT_EQ(FirstRejection(files), files.prices() + ":5:4: price '-3' is not a positive number");
}

TEST(LoadSurvey, ListsUnknownColumnsOfEveryFileAsIgnored) {
  const SurveyDir files = MakeSurvey("ignored", "region,shop,item,price,heading,date\nnorth,s1,bread,2,food,d\n",
                                        "region,heading,expenditure,source\nnorth,food,1,x\n",
                                        "item,heading,unit,colour\nbread,food,loaf,brown\n",
                                        "region,name,capital\nnorth,North,n\n");
  Survey survey;
  const LoadSummary summary = Load(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(FileOf(summary, "prices").ignored_columns, (std::vector<std::string>{"shop", "date"}));
  EXPECT_EQ(FileOf(summary, "expenditure").ignored_columns, std::vector<std::string>{"source"});
  EXPECT_EQ(FileOf(summary, "items").ignored_columns, std::vector<std::string>{"colour"});
  EXPECT_EQ(FileOf(summary, "regions").ignored_columns, std::vector<std::string>{"capital"});
  EXPECT_EQ(survey.item_unit, std::vector<std::string>{"loaf"});
}

// ---------------------------------------------------------------------------
// Never crash, hang or read out of bounds.

TEST(LoadSurvey, ReportsAFileCutMidQuote) {
  const SurveyDir files = MakeSurvey("cut_mid_quote", std::string(kPrices) + "south,eggs,\"1.");
  EXPECT_EQ(LoadMessage(files), files.prices() + ":6:3: unterminated quoted field (opened here)");
  const SurveyDir header = MakeSurvey("cut_mid_quote_header", "region,\"item");
  EXPECT_EQ(LoadMessage(header), header.prices() + ":1:2: unterminated quoted field (opened here)");
}

TEST(LoadSurvey, ReadsATruncatedLastRow) {
  const SurveyDir files = MakeSurvey("truncated_row", std::string(kPrices) + "south,eg");
  EXPECT_EQ(FirstRejection(files), files.prices() + ":6:3: row has 2 fields, the header has 4");
}

TEST(LoadSurvey, ReportsRandomBytesCleanly) {
  std::mt19937 random(12345);
  for (int trial = 0; trial < 4; ++trial) {
    std::string bytes(200000, '\0');
    for (char& c : bytes) c = static_cast<char>(random() & 0xff);
    if (trial >= 2) bytes = "region,item,price,heading\n" + bytes;  // Garbage after a good header.
    const SurveyDir files = MakeSurvey("random_" + std::to_string(trial), bytes);
    Survey survey;
    LoadOptions options;
    options.invalid_rows = trial % 2 == 0 ? InvalidRowPolicy::kStop : InvalidRowPolicy::kSkip;
    const LoadSummary summary = Load(files.config, &survey, options);
    EXPECT_EQ(summary.outcome, LoadOutcome::kInvalidInput);
    EXPECT_EQ(summary.message.rfind(files.prices() + ":", 0), 0u) << summary.message;
    EXPECT_LT(summary.message.size(), 2000u);
  }
}

TEST(LoadSurvey, ReadsControlBytesAndUtf8InsideFieldsAsCodes) {
  // NUL is valid UTF-8 (U+0000); bytes that are not UTF-8 are rejected (above).
  const std::string nul("n\0rth", 5);
  const SurveyDir files =
      MakeSurvey("binary_codes", "region,item,price,heading\n" + nul +
                                     ",\xE2\x82\xAC,2,food\nsouth,\xE2\x82\xAC,3,food\n");
  Survey survey;
  const LoadSummary summary = Load(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(survey.regions.Find(nul), 0);
  EXPECT_EQ(survey.items.Codes(), std::vector<std::string>{"\xE2\x82\xAC"});
}

// Beyond limits.max_field_bytes the file stops; under a raised limit the
// field is only a code too long for its row.
TEST(LoadSurvey, RefusesAFiftyMegabyteFieldUnlessTheLimitIsRaised) {
  std::string prices = kPrices;
  prices += std::string(50 << 20, 'R') + ",bread,2,food\n";
  SurveyDir files = MakeSurvey("huge_field", prices);
  EXPECT_EQ(LoadMessage(files), files.prices() +
                                    ":6:1: a field longer than 1 MiB "
                                    "(limits.max_field_bytes); raise the limit if "
                                    "the file is right");
  files.config.limits.max_field_bytes = files.config.limits.max_record_bytes = int64_t{64} << 20;
  EXPECT_EQ(FirstRejection(files), files.prices() + ":6:1: region '" + std::string(60, 'R') +
                                       "...' is longer than 200 characters");
  std::filesystem::remove_all(files.dir);
}

// Devices and pipes report no size; reading stops at the limits.
TEST(LoadSurvey, StopsAtTheLimitsOnDevZero) {
  SurveyDir files = MakeSurvey("dev_zero", std::nullopt);
  files.config.survey.prices = {PriceSource{"/dev/zero", CsvFormat(), {}}};
  EXPECT_EQ(LoadMessage(files),
            "/dev/zero:1:1: a field longer than 1 MiB (limits.max_field_bytes); "
            "raise the limit if the file is right");
  files.config.limits.max_field_bytes = int64_t{32} << 20;  // The record limit comes first.
  EXPECT_EQ(LoadMessage(files),
            "/dev/zero:1: a record longer than 16 MiB "
            "(limits.max_record_bytes); raise the limit if the file is right");
  WriteTextFile(files.dir + "/prices.csv", kPrices);
  files.config.survey.prices = {PriceSource{files.dir + "/prices.csv", CsvFormat(), {}}};
  files.config.survey.expenditure = "/dev/zero";
  files.config.limits.max_file_bytes = 1 << 20;
  EXPECT_EQ(LoadMessage(files),
            "/dev/zero: file larger than 1 MiB (limits.max_file_bytes); raise "
            "the limit if the file is right");
}

TEST(LoadSurvey, ReadsSmallTablesUnderTheConfiguredLimits) {
  std::string regions = "region,name\n";
  for (int r = 0; r < 100; ++r)
    regions += "r" + std::to_string(r) + ",Region " + std::to_string(r) + "\n";
  regions += "north,North\nsouth,South\n";
  SurveyDir files = MakeSurvey("small_limits", kPrices, kExpenditure, std::nullopt, regions);
  files.config.limits.max_file_bytes = 1000;
  EXPECT_EQ(LoadMessage(files), files.regions() +
                                    ": file larger than 1000 bytes "
                                    "(limits.max_file_bytes); raise the limit if the "
                                    "file is right");
  files.config.limits.max_file_bytes = 4000;
  files.config.limits.max_record_bytes = 12;
  EXPECT_EQ(LoadMessage(files), files.regions() +
                                    ":12: a record longer than 12 bytes "
                                    "(limits.max_record_bytes); raise the limit if the "
                                    "file is right");
  files.config.limits.max_record_bytes = 100;
  Survey survey;
  EXPECT_EQ(Load(files.config, &survey).outcome, LoadOutcome::kOk);
}

// prices.csv through a FIFO, fed in small pieces by another thread.
TEST(LoadSurvey, ReadsPricesFromAPipe) {
  SurveyDir files = MakeSurvey("fifo", std::nullopt);
  const std::string fifo = files.dir + "/prices.fifo";
  ASSERT_EQ(::mkfifo(fifo.c_str(), 0600), 0);
  files.config.survey.prices = {PriceSource{fifo, CsvFormat(), {}}};
  std::thread writer([&fifo] {
    std::FILE* out = std::fopen(fifo.c_str(), "wb");
    if (out == nullptr) return;
    const std::string text = kPrices;
    for (char c : text) {
      std::fputc(c, out);
      std::fflush(out);
    }
    std::fclose(out);
  });
  Survey survey;
  const LoadSummary summary = Load(files.config, &survey);
  writer.join();
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(survey.num_quotes, 4);
  EXPECT_EQ(FileOf(summary, "prices").size_bytes,
            static_cast<int64_t>(std::string(kPrices).size()));
  EXPECT_EQ(FileOf(summary, "prices").sha256, internal::Sha256Hex(kPrices));
}

TEST(LoadSurvey, ReadsAHeaderWithAMillionColumns) {
  constexpr int kNumColumns = 1000000;
  std::string header = "region,item,price,heading";
  std::string row_tail;
  for (int c = 4; c < kNumColumns; ++c) {
    header += ",c" + std::to_string(c);
    row_tail += ",";
  }
  const std::string prices = header + "\nnorth,bread,2,food" + row_tail + "\nsouth,bread,3,food" + row_tail +
                             "\nsouth,milk,3,food\n";
  const SurveyDir files = MakeSurvey("million_columns", prices);
  Survey survey;
  const LoadSummary summary = LoadSkipping(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message.substr(0, 300);
  EXPECT_EQ(FileOf(summary, "prices").ignored_columns.size(), static_cast<size_t>(kNumColumns - 4));
  EXPECT_EQ(FileOf(summary, "prices").rows_used, 2);
  ASSERT_EQ(summary.rejected_rows.size(), 1u);
  EXPECT_EQ(summary.rejected_rows[0].reason,
            files.prices() + ":4:5: row has 4 fields, the header has 1000000");
  std::filesystem::remove_all(files.dir);
}

TEST(LoadSurvey, ShortensTheColumnListOfAMissingColumnMessage) {
  std::string header = "region,item";
  for (int c = 2; c < 100000; ++c) header += ",c" + std::to_string(c);
  const SurveyDir files = MakeSurvey("many_columns_missing", header + "\n");
  const std::string message = LoadMessage(files);
  EXPECT_EQ(message, files.prices() +
                         ":1: missing column 'price' (found: region, item, c2, c3, c4, c5, c6, c7, c8, c9, c10, "
                         "c11, c12, c13, c14, c15, c16, c17, c18, c19, ... (100000 columns))");
}

// ---------------------------------------------------------------------------
// Determinism: blocks, chunks and threads.

// About 5 MB of quotes (three 2 MiB parsing chunks), with a quoted
// multi-line description in an ignored column and, after an item's first
// rows, rows that leave its heading empty.
constexpr int kNumLargeRows = 150000;
std::string LargePrices() {
  std::string text = "region,item,description,price,heading,representative\n";
  std::mt19937 random(7);
  for (int row = 0; row < kNumLargeRows; ++row) {
    const int region = static_cast<int>(random() % 12);
    const int item = static_cast<int>(random() % 90);
    const double price = 1.0 + static_cast<double>(random() % 10000) / 100.0;
    text += "r" + std::to_string(region) + ",item" + std::to_string(item);
    text += row % 7 == 0 ? ",\"line one\nline, two\"" : ",plain";
    text += "," + std::to_string(price);
    text += row < 2000 || row % 3 != 0 ? ",h" + std::to_string(item % 9) : ",";
    text += row % 5 == 0 ? ",1\n" : ",0\n";
  }
  return text;
}

void ExpectSameCells(const Survey& a, const Survey& b) {
  EXPECT_EQ(a.regions.Codes(), b.regions.Codes());
  EXPECT_EQ(a.items.Codes(), b.items.Codes());
  EXPECT_EQ(a.num_quotes, b.num_quotes);
  EXPECT_EQ(a.cells.region, b.cells.region);
  EXPECT_EQ(a.cells.item, b.cells.item);
  EXPECT_EQ(a.cells.num_quotes, b.cells.num_quotes);
  EXPECT_EQ(a.cells.representative, b.cells.representative);
  EXPECT_EQ(a.cells.log_min, b.cells.log_min);
  EXPECT_EQ(a.cells.log_max, b.cells.log_max);
  // Moments combined in a different grouping agree to rounding.
  ASSERT_EQ(a.cells.size(), b.cells.size());
  for (size_t k = 0; k < a.cells.size(); ++k) {
    PARITAS_EXPECT_CLOSE(a.cells.log_price[k], b.cells.log_price[k], 1e-13);
    PARITAS_EXPECT_CLOSE(a.cells.log_sd[k], b.cells.log_sd[k], 1e-12);
  }
}

TEST(LoadSurvey, GivesTheSameCellsForSmallBlocksAsForOneBlock) {
  std::string expenditure = "region,heading,expenditure\n";
  for (int r = 0; r < 12; ++r) expenditure += "r" + std::to_string(r) + ",h0,1\n";
  const SurveyDir files = MakeSurvey("blocks", LargePrices(), expenditure);
  Survey one_block, small_blocks;
  LoadOptions options;
  const LoadSummary whole = Load(files.config, &one_block, options);
  ASSERT_EQ(whole.outcome, LoadOutcome::kOk) << whole.message << " " << whole.rejected_rows.size();
  options.block_bytes = 4096;
  const LoadSummary blocked = Load(files.config, &small_blocks, options);
  ASSERT_EQ(blocked.outcome, LoadOutcome::kOk) << blocked.message;
  EXPECT_GT(FileOf(whole, "prices").size_bytes, 2 * (2 << 20));  // More than two chunks.
  EXPECT_EQ(one_block.num_quotes, kNumLargeRows);
  ExpectSameCells(one_block, small_blocks);
  EXPECT_EQ(FileOf(whole, "prices").sha256, FileOf(blocked, "prices").sha256);
  EXPECT_EQ(FileOf(whole, "prices").sha256, internal::Sha256Hex(LargePrices()));
  EXPECT_EQ(FileOf(whole, "prices").ignored_columns, std::vector<std::string>{"description"});
}

// Once a block is merged, its regions and items are known to the next
// blocks, which settle a row restating them by one lookup: rows that restate
// them with spaces, no heading or another heading must come out as in one
// block, where the item was first seen in the same chunk.
TEST(LoadSurvey, ReadsKnownCodesInLaterBlocksAsInTheBlockThatStatedThem) {
  std::string prices = "region,item,price,heading\nr0,apple,2.5,h1\nr1,pear,3,h2\n";
  for (int k = 0; k < 600; ++k) {
    prices += "r" + std::to_string(k % 3) + (k % 2 == 0 ? ",apple,2." : ",pear,3.") +
              std::to_string(k) + (k % 2 == 0 ? ",h1\n" : ",h2\n");
  }
  ASSERT_GT(prices.size(), 2u * 4096);  // The rows below are in a later block.
  prices +=
      "r1,apple,7,h1\n"       // settled by the lookup
      " r1 ,apple,7.5, h1 \n"  // spaces around codes: the general way, accepted
      "r2, apple,8,\n"         // no heading: accepted
      "r2,apple,9,h2\n"        // another heading: a conflict
      "r9,apple,9,h1\n"        // not in regions.csv
      "r0,apple,x,h1\n"        // a bad price
      "r0,apple,-1,h1\n";      // not positive
  const SurveyDir files =
      MakeSurvey("known_codes", prices,
                 "region,heading,expenditure\nr0,h1,1\nr1,h1,1\nr2,h1,1\nr0,h2,1\nr1,h2,1\n"
                 "r2,h2,1\n",
                 std::nullopt, "region,name\nr0,Zero\nr1,One\nr2,Two\n");
  LoadOptions options;
  options.invalid_rows = InvalidRowPolicy::kSkip;
  Survey one_block, small_blocks;
  const LoadSummary whole = Load(files.config, &one_block, options);
  options.block_bytes = 4096;
  const LoadSummary blocked = Load(files.config, &small_blocks, options);
  ASSERT_EQ(whole.outcome, LoadOutcome::kOk) << whole.message;
  ASSERT_EQ(blocked.outcome, LoadOutcome::kOk) << blocked.message;
  ExpectSameCells(one_block, small_blocks);
  EXPECT_EQ(one_block.num_quotes, 2 + 600 + 3);
  const int64_t first = 2 + 2 + 600;  // the line of "r1,apple,7,h1"
  const std::vector<std::string> expected = {
      files.prices() + ":" + std::to_string(first + 3) +
          ":4: item 'apple' is filed under heading 'h2' but under 'h1' at line 2",
      files.prices() + ":" + std::to_string(first + 4) + ":1: region 'r9' is not in " +
          files.regions(),
      files.prices() + ":" + std::to_string(first + 5) + ":3: price 'x' is not a number",
      files.prices() + ":" + std::to_string(first + 6) + ":3: price '-1' is not a positive number"};
  for (const LoadSummary* summary : {&whole, &blocked}) {
    ASSERT_EQ(summary->rejected_rows.size(), expected.size());
    for (size_t k = 0; k < expected.size(); ++k) {
      EXPECT_EQ(summary->rejected_rows[k].reason, expected[k]);
    }
  }
}

// At least `bytes` of quote rows for three regions and 50 items of one
// heading (kThreeRegionsSpending), one line each.
std::string UniformPrices(size_t bytes) {
  std::string prices = "region,item,price,heading\n";
  for (int row = 0; prices.size() < bytes; ++row) {
    prices += "r" + std::to_string(row % 3) + ",item" + std::to_string(row % 50) + "," +
              std::to_string(10 + row % 89) + ",h1\n";
  }
  return prices;
}
constexpr char kThreeRegionsSpending[] = "region,heading,expenditure\nr0,h1,1\nr1,h1,1\nr2,h1,1\n";

// Loads in the smallest blocks (64 KiB), so that a file of a few MB is read
// in tens of them.
LoadSummary LoadInSmallestBlocks(const RunConfig& config, Survey* survey) {
  LoadOptions options;
  options.block_bytes = 1 << 16;
  return Load(config, survey, options);
}

// The quote arrays are reserved for the whole file from its size and the
// first block's rows per byte: a file of 40 blocks (more than the 16 times
// the first block's rows the reservation was once held to) is read without
// moving them.
TEST(LoadSurvey, ReservesTheQuotesOfAFileOfManyBlocksOnce) {
  const std::string prices = UniformPrices(40 << 16);
  const SurveyDir files = MakeSurvey("many_blocks", prices, kThreeRegionsSpending);
  Survey survey;
  const LoadSummary summary = LoadInSmallestBlocks(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(survey.num_quotes, std::count(prices.begin(), prices.end(), '\n') - 1);
  EXPECT_EQ(summary.num_quote_array_moves, 0);
}

// Rows that get shorter after the first block outgrow the reservation: the
// arrays are reserved again from the rows per byte seen by then, and every
// quote is kept.
TEST(LoadSurvey, ReservesTheQuotesAgainWhenLaterBlocksHoldMoreRows) {
  std::string prices = "region,item,price,heading,note\n";
  const std::string long_note(200, 'x');
  int32_t rows_of[2] = {0, 0};
  while (prices.size() < 1 << 16) {
    prices += "r0,bread,2.5,h1," + long_note + "\n";
    ++rows_of[0];
  }
  for (int row = 0; prices.size() < 20 << 16; ++row) {
    prices += "r" + std::to_string(row % 2) + ",bread,3,h1,\n";
    ++rows_of[row % 2];
  }
  const SurveyDir files = MakeSurvey("shorter_rows", prices, "region,heading,expenditure\nr0,h1,1\nr1,h1,1\n");
  Survey survey;
  const LoadSummary summary = LoadInSmallestBlocks(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(survey.num_quotes, rows_of[0] + rows_of[1]);
  // From the rows per byte seen: 2 renewals; growing by half each time, 7.
  EXPECT_GE(summary.num_quote_array_moves, 1);
  EXPECT_LE(summary.num_quote_array_moves, 3);
  EXPECT_EQ(survey.cells.num_quotes, (std::vector<int32_t>{rows_of[0], rows_of[1]}));
}

// A pipe has no size to reserve by: the quote arrays then grow by at least
// half at each renewal (a few renewals over 40 blocks, not one per block),
// and every quote is kept.
TEST(LoadSurvey, GrowsTheQuotesOfAPipeGeometrically) {
  const std::string prices = UniformPrices(40 << 16);
  SurveyDir files = MakeSurvey("many_blocks_fifo", std::nullopt, kThreeRegionsSpending);
  const std::string fifo = files.dir + "/prices.fifo";
  ASSERT_EQ(::mkfifo(fifo.c_str(), 0600), 0);
  files.config.survey.prices = {PriceSource{fifo, CsvFormat(), {}}};
  std::thread writer([&fifo, &prices] {
    // A reader that stops early fails the test, not the process.
    sigset_t pipe_signal;
    sigemptyset(&pipe_signal);
    sigaddset(&pipe_signal, SIGPIPE);
    pthread_sigmask(SIG_BLOCK, &pipe_signal, nullptr);
    std::FILE* out = std::fopen(fifo.c_str(), "wb");
    if (out == nullptr) return;
    std::fwrite(prices.data(), 1, prices.size(), out);
    std::fclose(out);
  });
  Survey survey;
  const LoadSummary summary = LoadInSmallestBlocks(files.config, &survey);
  writer.join();
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(survey.num_quotes, std::count(prices.begin(), prices.end(), '\n') - 1);
  EXPECT_GE(summary.num_quote_array_moves, 1);
  EXPECT_LE(summary.num_quote_array_moves, 10);  // 1.5^10 > 40 blocks
}

TEST(LoadSurvey, GivesTheSameCellsAndRejectionsForOneAndTwoThreads) {
  std::string prices = LargePrices();
  prices += "r1,item1,x,-2,h1,0\n";
  const SurveyDir files = MakeSurvey("threads", prices);
  Survey one, two;
  LoadOptions options;
  options.invalid_rows = InvalidRowPolicy::kSkip;
  options.num_threads = 1;
  const LoadSummary a = Load(files.config, &one, options);
  options.num_threads = 2;
  const LoadSummary b = Load(files.config, &two, options);
  ASSERT_EQ(a.outcome, LoadOutcome::kOk) << a.message;
  ASSERT_EQ(b.outcome, LoadOutcome::kOk) << b.message;
  ExpectSameCells(one, two);
  ASSERT_EQ(a.rejected_rows.size(), 1u);
  ASSERT_EQ(b.rejected_rows.size(), 1u);
  EXPECT_EQ(a.rejected_rows[0].reason, b.rejected_rows[0].reason);
  // The header, the rows, one quoted newline in rows 0, 7, 14, ..., then the bad row.
  EXPECT_EQ(a.rejected_rows[0].line, 1 + kNumLargeRows + (kNumLargeRows + 6) / 7 + 1);
}

// Each chunk of a block writes its quotes into room for one quote per line
// feed: rows rejected and records spanning two lines leave gaps that must be
// closed in file order. One chunk per block (4 KiB blocks) leaves none
// between chunks, chunks of 100 bytes leave them at almost every chunk's
// end, and the file without its rejected rows none at all.
TEST(LoadSurvey, ClosesTheGapsLeftByRejectedRowsBetweenTheChunksOfABlock) {
  std::string prices = "region,item,description,price,heading\n";
  std::string clean = prices;
  std::mt19937 random(11);
  for (int row = 0; row < kNumLargeRows; ++row) {
    const int item = static_cast<int>(random() % 90);
    std::string text = "r" + std::to_string(random() % 12) + ",item" + std::to_string(item);
    text += row % 7 == 0 ? ",\"line one\nline, two\"" : ",plain";
    const bool bad = row % 53 == 0 && row > 0;
    text += bad ? ",x" : "," + std::to_string(1.0 + static_cast<double>(random() % 10000) / 100.0);
    text += ",h" + std::to_string(item % 9) + "\n";
    prices += text;
    if (!bad) clean += text;
  }
  const SurveyDir files = MakeSurvey("gaps", prices);
  const SurveyDir clean_files = MakeSurvey("gaps_clean", clean);
  LoadOptions options;
  options.invalid_rows = InvalidRowPolicy::kSkip;
  Survey without_bad_rows;
  ASSERT_EQ(Load(clean_files.config, &without_bad_rows, options).outcome, LoadOutcome::kOk);
  for (const int num_threads : {1, 2}) {
    for (const int64_t block_bytes : {int64_t{16} << 20, int64_t{4096}}) {
      for (const int64_t chunk_bytes : {int64_t{2} << 20, int64_t{100}}) {
        options.num_threads = num_threads;
        options.block_bytes = block_bytes;
        options.chunk_bytes = chunk_bytes;
        Survey survey;
        const LoadSummary summary = Load(files.config, &survey, options);
        ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
        EXPECT_EQ(summary.rejected_rows.size(), static_cast<size_t>((kNumLargeRows - 1) / 53));
        ExpectSameCells(survey, without_bad_rows);
      }
    }
  }
}

// Quotes of `num_regions` x `num_items` possible cells in shuffled file
// order: about 70 % of the cells priced, 1 to 3 quotes each, with flags and
// quote weights; the last item and region get none.
internal::QuoteArrays ShuffledQuotes(int num_regions, int num_items, uint64_t seed) {
  std::mt19937_64 random(seed);
  internal::QuoteArrays quotes;
  for (int i = 0; i + 1 < num_items; ++i) {
    for (int r = 0; r + 1 < num_regions; ++r) {
      if (random() % 10 >= 7) continue;
      for (int n = 1 + static_cast<int>(random() % 3); n > 0; --n) {
        quotes.region.push_back(r);
        quotes.item.push_back(i);
        quotes.log_price.push_back(std::log(1.0 + static_cast<double>(random() % 100000) / 100.0));
        quotes.representative.push_back(random() % 4 == 0 ? 1 : 0);
        quotes.weight.push_back(0.5 + static_cast<double>(random() % 100) / 40.0);
      }
    }
  }
  std::vector<size_t> order(quotes.size());
  for (size_t q = 0; q < order.size(); ++q) order[q] = q;
  std::shuffle(order.begin(), order.end(), random);
  internal::QuoteArrays shuffled;
  for (size_t q : order) {
    shuffled.region.push_back(quotes.region[q]);
    shuffled.item.push_back(quotes.item[q]);
    shuffled.log_price.push_back(quotes.log_price[q]);
    shuffled.representative.push_back(quotes.representative[q]);
    shuffled.weight.push_back(quotes.weight[q]);
  }
  return shuffled;
}

// The cells written out here: quotes grouped by (item, region), cells in
// that order, each cell's moments by West's weighted update (D. H. D. West,
// 1979, Comm. ACM 22(9), 532-535: W += w; mean += (w / W)(x - mean);
// M2 += w (x - mean_old)(x - mean_new)) applied in file order, computed here.
CellPrices CellsWrittenOut(const internal::QuoteArrays& quotes, int num_regions, int num_items) {
  std::vector<std::vector<size_t>> by_key(static_cast<size_t>(num_regions) * num_items);
  for (size_t q = 0; q < quotes.size(); ++q) {
    by_key[static_cast<size_t>(quotes.item[q]) * num_regions + quotes.region[q]].push_back(q);
  }
  CellPrices cells;
  for (size_t key = 0; key < by_key.size(); ++key) {
    if (by_key[key].empty()) continue;
    double sum_w = 0.0, sum_w2 = 0.0, mean = 0.0, m2 = 0.0;
    double low = quotes.log_price[by_key[key][0]], high = low;
    uint8_t flag = 0;
    for (size_t q : by_key[key]) {
      const double x = quotes.log_price[q], w = quotes.weight[q];
      sum_w += w;
      sum_w2 += w * w;
      const double delta = x - mean;
      mean += delta * (w / sum_w);
      m2 += w * delta * (x - mean);
      low = std::min(low, x);
      high = std::max(high, x);
      flag |= quotes.representative[q];
    }
    const size_t n = by_key[key].size();
    cells.region.push_back(static_cast<int32_t>(key % num_regions));
    cells.item.push_back(static_cast<int32_t>(key / num_regions));
    cells.log_price.push_back(mean);
    cells.log_sd.push_back(n < 2 ? 0.0 : std::sqrt(std::max(m2, 0.0) / (sum_w - sum_w2 / sum_w)));
    cells.log_min.push_back(low);
    cells.log_max.push_back(high);
    cells.num_quotes.push_back(static_cast<int32_t>(n));
    cells.representative.push_back(flag);
    cells.weight.push_back(sum_w);
  }
  return cells;
}

void ExpectSameCellArrays(const CellPrices& got, const CellPrices& want) {
  EXPECT_EQ(got.region, want.region);
  EXPECT_EQ(got.item, want.item);
  EXPECT_EQ(got.num_quotes, want.num_quotes);
  EXPECT_EQ(got.representative, want.representative);
  // The same additions in the same order: equal to the last bit.
  EXPECT_EQ(got.log_price, want.log_price);
  EXPECT_EQ(got.log_sd, want.log_sd);
  EXPECT_EQ(got.log_min, want.log_min);
  EXPECT_EQ(got.log_max, want.log_max);
  EXPECT_EQ(got.weight, want.weight);
}

TEST(CellsFromQuotes, AccumulatesEachCellsQuotesInFileOrderForOneAndTwoThreads) {
  // Over 2^20 quotes, so that two threads split the counting.
  const int num_regions = 400, num_items = 2000;
  const internal::QuoteArrays quotes = ShuffledQuotes(num_regions, num_items, 11);
  ASSERT_GT(quotes.size(), size_t{1} << 20);
  const CellPrices want = CellsWrittenOut(quotes, num_regions, num_items);
  for (int threads : {1, 2}) {
    SCOPED_TRACE(threads);
    CellPrices got;
    internal::QuoteArrays consumed = quotes;
    internal::CellsFromQuotes(&consumed, num_regions, num_items, threads, &got);
    ExpectSameCellArrays(got, want);
    // The quotes are released once the cells no longer need them.
    EXPECT_EQ(consumed.size(), 0u);
    EXPECT_EQ(consumed.log_price.capacity(), 0u);
  }
}

TEST(CellsFromQuotes, AccumulatesInFileOrderWhenTheCellKeysAreTooManyToCount) {
  // 12 million possible cells for about 8,000 quotes: the sorted-positions path.
  const int num_regions = 3000, num_items = 4000;
  internal::QuoteArrays quotes = ShuffledQuotes(60, 80, 12);
  for (size_t q = 0; q < quotes.size(); ++q) {
    quotes.region[q] = quotes.region[q] * 50 + 7;
    quotes.item[q] = quotes.item[q] * 50 + 3;
  }
  CellPrices got;
  internal::QuoteArrays consumed = quotes;
  internal::CellsFromQuotes(&consumed, num_regions, num_items, 2, &got);
  ExpectSameCellArrays(got, CellsWrittenOut(quotes, num_regions, num_items));
  EXPECT_EQ(consumed.size(), 0u);
}

TEST(CellsFromQuotes, KeepsEveryRegionIndexEitherSideOfSixteenBits) {
  // The item buckets hold regions in 16 bits up to 65,536 regions, in 32
  // bits beyond: the top index of each side, counted densely (10 items).
  for (const int num_regions : {65536, 65537}) {
    SCOPED_TRACE(num_regions);
    const int num_items = 10;
    internal::QuoteArrays quotes = ShuffledQuotes(60, num_items + 1, 13);
    for (size_t q = 0; q < quotes.size(); ++q) {
      const int r = quotes.region[q];
      quotes.region[q] = r == 58 ? num_regions - 1 : r * 1100 + 5;
    }
    ASSERT_NE(std::find(quotes.region.begin(), quotes.region.end(), num_regions - 1),
              quotes.region.end());
    CellPrices got;
    internal::QuoteArrays consumed = quotes;
    internal::CellsFromQuotes(&consumed, num_regions, num_items, 2, &got);
    ExpectSameCellArrays(got, CellsWrittenOut(quotes, num_regions, num_items));
  }
}

TEST(LoadSurvey, ReportsTheFirstHeadingConflictInFileOrderAcrossChunks) {
  // The same new item is stated under two headings in different chunks.
  std::string prices = "region,item,price,heading\n";
  for (int row = 0; row < 120000; ++row) prices += "r" + std::to_string(row % 5) + ",filler,1.5,h\n";
  prices += "r1,late,2,first\n";
  for (int row = 0; row < 60000; ++row) prices += "r" + std::to_string(row % 5) + ",filler,1.5,h\n";
  prices += "r2,late,2,second\n";
  const SurveyDir files = MakeSurvey("cross_chunk", prices);
  EXPECT_EQ(FirstRejection(files), files.prices() + ":180003:4: item 'late' is filed under heading 'second' "
                                                    "but under 'first' at line 120002");
}

TEST(LoadSurvey, NamesTheFirstStatementOfAHeadingRestatedInALaterChunk) {
  // A new item's heading is stated at line 2, stated again more than a
  // chunk later, and contradicted after that: the message names line 2
  // (the first statement in the file), wherever the chunks end.
  std::string prices = "region,item,price,heading\nr1,late,2,first\n";
  for (int row = 0; row < 150000; ++row) prices += "r" + std::to_string(row % 5) + ",filler,1.5,h\n";
  prices += "r1,late,2,first\n";
  for (int row = 0; row < 1000; ++row) prices += "r" + std::to_string(row % 5) + ",filler,1.5,h\n";
  prices += "r2,late,2,second\n";
  const SurveyDir files = MakeSurvey("restated_heading", prices);
  EXPECT_EQ(FirstRejection(files), files.prices() + ":151004:4: item 'late' is filed under heading "
                                                    "'second' but under 'first' at line 2");
}

TEST(LoadSurvey, DoesNotMixUpCodesWrittenWithDoubledQuotes) {
  const SurveyDir files = MakeSurvey("doubled_quotes",
                                        "region,item,price,heading\n"
                                        "\"a\"\"b\",bread,2,food\n"
                                        "\"c\"\"d\",bread,3,food\n"
                                        "\"a\"\"b\",\"x\"\"y\",4,food\n"
                                        "\"c\"\"d\",\"w\"\"z\",5,food\n",
                                        "region,heading,expenditure\n\"a\"\"b\",food,1\n");
  Survey survey;
  const LoadSummary summary = Load(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(survey.regions.Codes(), (std::vector<std::string>{"a\"b", "c\"d"}));
  EXPECT_EQ(survey.items.Codes(), (std::vector<std::string>{"bread", "w\"z", "x\"y"}));
  EXPECT_EQ(survey.cells.size(), 4u);
}

// ---------------------------------------------------------------------------
// Structure per heading.

TEST(HeadingRegionGroups, LinksRegionsThroughOtherRegions) {
  // a-b share bread, b-c share milk: one group although a and c share nothing.
  const SurveyDir files = MakeSurvey("linked_chain",
                                        "region,item,price,heading\n"
                                        "a,bread,1,food\nb,bread,1,food\nb,milk,1,food\nc,milk,1,food\n",
                                        "region,heading,expenditure\na,food,1\n");
  Survey survey;
  ASSERT_EQ(Load(files.config, &survey).outcome, LoadOutcome::kOk);
  EXPECT_EQ(HeadingRegionGroups(survey, 0), (std::vector<std::vector<int>>{{0, 1, 2}}));
}

TEST(HeadingRegionGroups, SplitsRegionsThatShareNoItemLargestGroupFirst) {
  const SurveyDir files = MakeSurvey("unlinked",
                                        "region,item,price,heading\n"
                                        "a,bread,1,food\nd,bread,1,food\n"
                                        "b,milk,1,food\nc,milk,1,food\ne,milk,2,food\n"
                                        "a,rent,5,housing\nb,rent,6,housing\n",
                                        "region,heading,expenditure\na,food,1\n");
  Survey survey;
  ASSERT_EQ(Load(files.config, &survey).outcome, LoadOutcome::kOk);
  EXPECT_EQ(survey.heading_codes, (std::vector<std::string>{"food", "housing"}));
  EXPECT_EQ(HeadingRegionGroups(survey, 0), (std::vector<std::vector<int>>{{1, 2, 4}, {0, 3}}));
  EXPECT_EQ(HeadingRegionGroups(survey, 1), (std::vector<std::vector<int>>{{0, 1}}));
}

TEST(LoadSurvey, ReportsAnInvalidHeadingAsSuchEvenForAnItemWhoseHeadingIsKnown) {
  // milk's heading is known from items.csv, as it would be from an earlier block.
  SurveyDir files = MakeSurvey("invalid_heading_known_item", std::string(kPrices) + "south,milk,1.4,toys\n",
                               kExpenditure, "item,heading\nbread,food\nmilk,food\n");
  UseClassification("all: [food]\n", &files.config);
  EXPECT_EQ(FirstRejection(files), files.prices() + ":6:4: heading 'toys' is not in the classification");
}

// ---------------------------------------------------------------------------
// Input realities: encodings, European CSV, rejections that cascade.

const char kUtf8Advice[] = "(the file may be Latin-1 or Windows-1252: save it as UTF-8)";

TEST(LoadSurvey, RejectsARowWithLatin1TextNamingLineAndColumn) {
  const SurveyDir files = MakeSurvey("latin1_row",
                                     "region,item,price,heading\n"
                                     "north,bread,2.0,food\n"
                                     "Z\xfcrich,bread,3.0,food\n");
  EXPECT_EQ(FirstRejection(files),
            files.prices() + ":3:1: region 'Z\\xfcrich' is not valid UTF-8 " + kUtf8Advice);
}

TEST(LoadSurvey, RejectsAHeaderThatIsNotUtf8) {
  const SurveyDir files =
      MakeSurvey("latin1_header", kPrices, "region,heading,d\xe9penses\nnorth,food,100\n");
  EXPECT_EQ(LoadMessage(files), files.expenditure() + ":1:3: column name 'd\\xe9penses' is not " +
                                    "valid UTF-8 " + kUtf8Advice);
}

TEST(LoadSurvey, CountsALatin1RowAsRejectedUnderSkip) {
  const SurveyDir files =
      MakeSurvey("latin1_skip", std::string(kPrices) + "south,m\xfcsli,4,food\n");
  Survey survey;
  const LoadSummary summary = LoadSkipping(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(FileOf(summary, "prices").rows_read, 5);
  EXPECT_EQ(FileOf(summary, "prices").rows_rejected, 1);
  ASSERT_EQ(summary.rejected_rows.size(), 1u);
  EXPECT_EQ(summary.rejected_rows[0].reason,
            files.prices() + ":6:2: item 'm\\xfcsli' is not valid UTF-8 " + kUtf8Advice);
}

TEST(LoadSurvey, ReadsSemicolonsAndDecimalCommasInEveryFile) {
  SurveyDir files = MakeSurvey(
      "european", "region;item;price;heading\nnorth;bread;2,5;food\nsouth;bread;\"3,75\";food\n",
      "region\theading\texpenditure\nnorth\tfood\t100,5\nsouth\tfood\t120\n", std::nullopt,
      "region;name;population\nnorth;North;1500,5\nsouth;\"South; coast\";2000\n");
  files.config.survey.prices[0].format = {';', ','};
  files.config.survey.expenditure_format = {'\t', ','};
  files.config.survey.regions_format = {';', ','};
  Survey survey;
  const LoadSummary summary = Load(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(std::exp(survey.cells.log_price[0]), 2.5);
  PARITAS_EXPECT_CLOSE(std::exp(survey.cells.log_price[1]), 3.75, 1e-15);
  EXPECT_EQ(survey.expenditure(0, 0), 100.5);
  EXPECT_EQ(survey.region_population[0], 1500.5);
  EXPECT_EQ(survey.region_name[1], "South; coast");
  EXPECT_EQ(FileOf(summary, "prices").format.delimiter, ';');
}

TEST(LoadSurvey, NamesThousandsSeparatorsAndDecimalCommasUnderTheDefaults) {
  const SurveyDir regions = MakeSurvey("thousands", kPrices, kExpenditure, std::nullopt,
                                       "region,population\nnorth,\"1,200,000\"\nsouth,5\n");
  EXPECT_EQ(FirstRejection(regions), regions.regions() +
                                         ":2:2: population '1,200,000' is not a number; thousands "
                                         "separators are not allowed (write 1200000)");
  const SurveyDir expenditure =
      MakeSurvey("decimal_comma", kPrices, "region,heading,expenditure\nnorth,food,\"11,77\"\n");
  EXPECT_EQ(FirstRejection(expenditure),
            expenditure.expenditure() + ":2:3: expenditure '11,77' is not a number; a decimal " +
                "comma needs decimal: ',' for this file (survey.expenditure)");
}

// regions.csv rejects 'south' (Latin-1 in its name); prices and expenditure name it.
SurveyDir RejectedRegionSurvey(const std::string& name) {
  return MakeSurvey(name, std::string(kPrices) + "east,bread,2.2,food\n",
                    "region,heading,expenditure\nnorth,food,100\nsouth,food,120\nwest,food,9\n",
                    std::nullopt,
                    "region,name\nnorth,North\nsouth,S\xfc"
                    "d\n");
}

TEST(LoadSurvey, CountsRowsOfARejectedRegionApartAndDescribesThemOnce) {
  const SurveyDir files = RejectedRegionSurvey("cascade_region");
  Survey survey;
  const LoadSummary summary = LoadSkipping(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  // prices: 2 rows of south (cascade) and east (not in regions.csv).
  EXPECT_EQ(FileOf(summary, "prices").rows_rejected, 3);
  EXPECT_EQ(FileOf(summary, "prices").rows_rejected_by_cascade, 2);
  EXPECT_EQ(FileOf(summary, "expenditure").rows_rejected, 2);
  EXPECT_EQ(FileOf(summary, "expenditure").rows_rejected_by_cascade, 1);
  EXPECT_EQ(summary.num_rows_rejected, 6);
  EXPECT_EQ(summary.num_rows_rejected_by_cascade, 3);
  ASSERT_EQ(summary.rejected_codes.size(), 1u);
  const std::string rejected_region = "region 'south' was rejected at " + files.regions() +
                                      ":3 (name 'S\\xfcd' is not valid " + "UTF-8 " + kUtf8Advice +
                                      "), so its 2 price rows and 1 expenditure row are left out";
  EXPECT_EQ(summary.rejected_codes[0].Describe(), rejected_region);
  // Each row is still listed for rejected.csv, with a short reason.
  EXPECT_EQ(summary.rejected_rows[1].reason,
            files.prices() + ":4:1: region 'south' was rejected at " + files.regions() + ":3");
  EXPECT_EQ(summary.rejected_rows[1].cause, RejectionCause::kRejectedCode);
  // Shown: the rows rejected for their own fault, then the region once.
  EXPECT_EQ(summary.DescribeRejections(20),
            files.regions() + ":3:2: name 'S\\xfcd' is not valid UTF-8 " + kUtf8Advice + "\n" +
                files.prices() + ":6:1: region 'east' is not in " + files.regions() + "\n" +
                files.expenditure() + ":4:1: region 'west' is not in " + files.regions() + "\n" +
                rejected_region + "\n");
}

// An external parity of a rejected region used to be blamed on regions.csv
// ("region 'south' is not in regions.csv"), where the region is listed.
TEST(LoadSurvey, LeavesOutTheExternalParitiesOfARejectedRegion) {
  SurveyDir files = RejectedRegionSurvey("cascade_external");
  files.config.survey.external_parities = files.dir + "/rents.csv";
  WriteTextFile(files.config.survey.external_parities,
                "heading,region,parity\nfood,north,1.0\nfood,south,1.2\n");
  Survey survey;
  const LoadSummary summary = LoadSkipping(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(FileOf(summary, "external_parities").rows_rejected, 1);
  EXPECT_EQ(FileOf(summary, "external_parities").rows_rejected_by_cascade, 1);
  ASSERT_EQ(summary.rejected_codes.size(), 1u);
  EXPECT_EQ(summary.rejected_codes[0].num_external_parity_rows, 1);
  EXPECT_EQ(summary.rejected_codes[0].Describe(),
            "region 'south' was rejected at " + files.regions() + ":3 (name 'S\\xfcd' is not valid " +
                "UTF-8 " + kUtf8Advice +
                "), so its 2 price rows, 1 expenditure row and 1 external parity row are left out");
  EXPECT_EQ(summary.rejected_rows.back().reason,
            files.dir + "/rents.csv:3:2: region 'south' was rejected at " + files.regions() + ":3");
}

TEST(LoadSurvey, StopCountsRowsOfARejectedRegionApartInItsMessage) {
  const SurveyDir files = RejectedRegionSurvey("cascade_stop");
  Survey survey;
  const LoadSummary summary = Load(files.config, &survey);
  EXPECT_EQ(summary.message,
            "3 invalid rows, 3 rows of rejected regions or items; fix them, or set invalid_rows: "
            "skip to leave them out");
  EXPECT_EQ(summary.rejected_rows.size(), 3u);
}

TEST(LoadSurvey, LeavesOutThePriceRowsOfARejectedItem) {
  SurveyDir files =
      MakeSurvey("cascade_item", kPrices, kExpenditure, "item,heading\nbread,food\nmilk,dairy\n");
  UseClassification("all: [food, drink]\n", &files.config);
  Survey survey;
  const LoadSummary summary = LoadSkipping(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  ASSERT_EQ(summary.rejected_codes.size(), 1u);
  EXPECT_EQ(summary.rejected_codes[0].Describe(),
            "item 'milk' was rejected at " + files.items() +
                ":3 (heading 'dairy' is not in the classification), so its 2 price rows are "
                "left out");
  EXPECT_EQ(FileOf(summary, "prices").rows_rejected_by_cascade, 2);
  EXPECT_EQ(survey.num_quotes, 2);
}

TEST(LoadSurvey, ReportsAnItemFiledUnderTwoHeadingsOnceWithTheRowsPerHeading) {
  const SurveyDir files = MakeSurvey("heading_conflict",
                                     "region,item,price,heading\n"
                                     "north,bread,2.0,food\nsouth,bread,3.0,food\n"
                                     "north,bread,2.1,bakery\nsouth,bread,3.1,bakery\n"
                                     "north,bread,2.2,snacks\nsouth,bread,3.2,bakery\n");
  Survey survey;
  const LoadSummary summary = LoadSkipping(files.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  ASSERT_EQ(summary.heading_conflicts.size(), 1u);
  const std::string conflict =
      "item 'bread' is filed under 'food' (" + files.prices() + ":2; 2 price rows used) and " +
      "under another heading in 4 price rows, rejected: 'bakery' in 3 (first at " + files.prices() +
      ":4), 'snacks' in 1 (first at " + files.prices() + ":6)";
  EXPECT_EQ(summary.heading_conflicts[0].Describe(files.prices()), conflict);
  EXPECT_EQ(summary.DescribeRejections(20), conflict + "\n");
  EXPECT_EQ(summary.rejected_rows.size(), 4u);
}

}  // namespace
}  // namespace paritas
