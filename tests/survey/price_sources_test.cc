// Tests of several price files (survey.prices as a list, column mappings),
// quote weights and observed quantities. Each case writes its files to its
// own folder; messages are checked word for word, and values are either
// computed by hand in the comment beside them or compared with the same
// survey read from one file.
#include <cmath>
#include <optional>
#include <string>
#include <unordered_map>
#include <vector>

#include "paritas/base/text.h"
#include "paritas/elementary/elementary.h"
#include "paritas/survey/survey_loader.h"
#include "test_util.h"

namespace paritas {
namespace {

using ::paritas::testing::MakeTempDir;
using ::paritas::testing::WriteTextFile;

const char kExpenditure[] =
    "region,heading,expenditure\n"
    "north,food,100\n"
    "south,food,120\n"
    "east,food,80\n";

// A survey whose prices are spread over files named in `config`.
struct Sources {
  std::string dir;
  RunConfig config;
  std::string path(size_t k) const { return config.survey.prices[k].path; }
};

// Writes each price file (its name, its text), expenditure and, when given, items.csv.
Sources MakeSources(const std::string& name,
                    const std::vector<std::pair<std::string, std::string>>& prices,
                    const std::optional<std::string>& items = std::nullopt) {
  Sources s;
  s.dir = MakeTempDir("sources_" + name);
  for (const auto& [file, text] : prices) {
    s.config.survey.prices.push_back(PriceSource{s.dir + "/" + file, CsvFormat(), {}});
    WriteTextFile(s.dir + "/" + file, text);
  }
  s.config.survey.expenditure = s.dir + "/expenditure.csv";
  WriteTextFile(s.config.survey.expenditure, kExpenditure);
  if (items) {
    s.config.survey.items = s.dir + "/items.csv";
    WriteTextFile(s.config.survey.items, *items);
  }
  return s;
}

LoadSummary Load(const RunConfig& config, Survey* survey, LoadOptions options = LoadOptions()) {
  LoadSummary summary;
  const bool ok = LoadSurvey(config, options, survey, &summary);
  EXPECT_EQ(ok, summary.outcome == LoadOutcome::kOk) << summary.message;
  int64_t rejected = 0;
  for (const InputFileSummary& file : summary.files) {
    EXPECT_EQ(file.rows_read, file.rows_used + file.rows_rejected) << file.path;
    rejected += file.rows_rejected;
  }
  EXPECT_EQ(rejected, summary.num_rows_rejected);
  return summary;
}

// The reason of the first rejected row under invalid_rows: stop.
std::string FirstRejection(const Sources& s) {
  Survey survey;
  const LoadSummary summary = Load(s.config, &survey);
  EXPECT_EQ(summary.outcome, LoadOutcome::kInvalidInput);
  if (summary.rejected_rows.empty()) return "no rejected row; message: " + summary.message;
  return summary.rejected_rows.front().reason;
}

// The cell of region `r` and item `i` (codes); fails when absent.
int64_t CellOf(const Survey& survey, const std::string& r, const std::string& i) {
  const int region = survey.regions.Find(r), item = survey.items.Find(i);
  for (size_t k = 0; k < survey.cells.size(); ++k) {
    if (survey.cells.region[k] == region && survey.cells.item[k] == item) {
      return static_cast<int64_t>(k);
    }
  }
  ADD_FAILURE() << "no cell " << r << " x " << i;
  return 0;
}

const char kWhole[] =
    "region,item,price,heading\n"
    "north,bread,2.0,food\n"
    "north,milk,1.0,food\n"
    "south,bread,3.0,food\n"
    "south,milk,1.5,food\n"
    "north,rent,500,food\n"
    "south,rent,650,food\n"
    "east,rent,420,food\n"
    "east,milk,1.25,food\n"
    "north,milk,1.1,food\n";

TEST(PriceSources, SeveralFilesGiveExactlyTheCellsOfOneConcatenatedFile) {
  const Sources one = MakeSources("concatenated", {{"prices.csv", kWhole}});
  // The same rows in three files: the second with its own headers (mapped)
  // and column order, the third with semicolons and decimal commas.
  Sources three = MakeSources("three", {{"main.csv",
                                         "region,item,price,heading\n"
                                         "north,bread,2.0,food\n"
                                         "north,milk,1.0,food\n"
                                         "south,bread,3.0,food\n"
                                         "south,milk,1.5,food\n"},
                                        {"rent.csv",
                                         "amount,area_code,product,heading\n"
                                         "500,north,rent,food\n"
                                         "650,south,rent,food\n"
                                         "420,east,rent,food\n"},
                                        {"tariffs.csv",
                                         "region;item;price;heading\n"
                                         "east;milk;1,25;food\n"
                                         "north;milk;1,1;food\n"}});
  three.config.survey.prices[1].columns = {
      {"region", "area_code"}, {"item", "product"}, {"price", "amount"}};
  three.config.survey.prices[2].format = {';', ','};
  Survey a, b;
  Load(one.config, &a);
  const LoadSummary summary = Load(three.config, &b);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk);
  EXPECT_EQ(a.regions.Codes(), b.regions.Codes());
  EXPECT_EQ(a.items.Codes(), b.items.Codes());
  EXPECT_EQ(a.cells.region, b.cells.region);
  EXPECT_EQ(a.cells.item, b.cells.item);
  EXPECT_EQ(a.cells.log_price, b.cells.log_price);  // exactly: same quotes in the same order
  EXPECT_EQ(a.cells.log_sd, b.cells.log_sd);
  EXPECT_EQ(a.cells.num_quotes, b.cells.num_quotes);
  EXPECT_EQ(a.num_quotes, b.num_quotes);
  // One summary per file, in the order given, between items and expenditure.
  ASSERT_EQ(summary.files.size(), 6u);
  EXPECT_EQ(summary.files[2].path, three.path(0));
  EXPECT_EQ(summary.files[3].path, three.path(1));
  EXPECT_EQ(summary.files[4].path, three.path(2));
  EXPECT_EQ(summary.files[3].rows_used, 3);
  EXPECT_EQ(summary.files[4].rows_used, 2);
  EXPECT_EQ(summary.files[3].columns.size(), 3u);
  EXPECT_EQ(summary.BriefReport(), "read 9 quotes; 0 rows rejected");
}

TEST(PriceSources, MessagesNameTheSecondFileAndItsLine) {
  const Sources s = MakeSources("second_file", {{"main.csv", kWhole},
                                                {"rent.csv",
                                                 "region,item,price,heading\n"
                                                 "north,garage,80,food\n"
                                                 "south,garage,-90,food\n"}});
  EXPECT_EQ(FirstRejection(s), s.path(1) + ":3:3: price '-90' is not a positive number");
}

TEST(PriceSources, RejectedRowsNameTheirOwnFile) {
  const Sources s = MakeSources("rejected_files", {{"main.csv",
                                                    "region,item,price,heading\n"
                                                    "north,bread,2.0,food\n"
                                                    "south,bread,x,food\n"
                                                    "east,bread,2.5,food\n"},
                                                   {"rent.csv",
                                                    "region,item,price,heading\n"
                                                    "north,rent,500,food\n"
                                                    ",rent,650,food\n"
                                                    "south,rent,600,food\n"}});
  LoadOptions options;
  options.invalid_rows = InvalidRowPolicy::kSkip;
  Survey survey;
  const LoadSummary summary = Load(s.config, &survey, options);
  ASSERT_EQ(summary.rejected_rows.size(), 2u);
  EXPECT_EQ(summary.rejected_rows[0].file, s.path(0));
  EXPECT_EQ(summary.rejected_rows[0].line, 3);
  EXPECT_EQ(summary.rejected_rows[1].file, s.path(1));
  EXPECT_EQ(summary.rejected_rows[1].line, 3);
  EXPECT_EQ(RejectedRowsCsv(summary.rejected_rows),
            "file,line,reason,raw\n" + s.path(0) + ",3," + s.path(0) +
                ":3:3: price 'x' is not a number,\"south,bread,x,food\"\n" + s.path(1) + ",3," +
                s.path(1) + ":3:1: region is empty,\",rent,650,food\"\n");
}

TEST(PriceSources, AMappedColumnMissingFromTheFileIsNamedAsTheFileWouldHaveIt) {
  Sources s = MakeSources("mapping_missing", {{"main.csv", kWhole},
                                              {"rent.csv",
                                               "area,item,price,heading\n"
                                               "north,rent,500,food\n"}});
  s.config.survey.prices[1].columns = {{"region", "area_code"}};
  Survey survey;
  EXPECT_EQ(Load(s.config, &survey).message,
            s.path(1) + ":1: missing column 'area_code' (found: area, item, price, heading)");
}

TEST(PriceSources, AnItemFiledUnderAnotherHeadingInALaterFileNamesTheFirstFile) {
  const Sources s = MakeSources("conflict", {{"main.csv", kWhole},
                                             {"rent.csv",
                                              "region,item,price,heading\n"
                                              "north,rent,500,housing\n"}});
  EXPECT_EQ(FirstRejection(s), s.path(1) +
                                   ":2:4: item 'rent' is filed under heading 'housing' but under "
                                   "'food' at " +
                                   s.path(0) + ":6");
}

// Both statements in one chunk of the second file: the first is named by
// file and line, as when an earlier block stated it (found by fuzzing).
TEST(PriceSources, AConflictWithinOneOfSeveralFilesNamesThatFileAndLine) {
  const Sources s = MakeSources("conflict_in_second_file",
                                {{"main.csv", kWhole},
                                 {"extra.csv",
                                  "region,item,price,heading\n"
                                  "north,fish,4.0,food\n"
                                  "south,fish,4.5,drink\n"}});
  EXPECT_EQ(FirstRejection(s), s.path(1) + ":3:4: item 'fish' is filed under heading 'drink' but " +
                                   "under 'food' at " + s.path(1) + ":2");
}

TEST(PriceSources, ARowRepeatedInALaterFileIsADuplicateWhateverTheColumnOrder) {
  Sources s = MakeSources("duplicates", {{"main.csv", kWhole},
                                         {"rent.csv",
                                          "heading,price,region,item\n"
                                          "food,650,south,rent\n"
                                          "food,651,south,rent\n"}});
  s.config.duplicate_quotes = DuplicateQuotePolicy::kReject;
  Survey survey;
  const LoadSummary summary = Load(s.config, &survey);
  EXPECT_EQ(summary.num_duplicate_quotes, 1);
  EXPECT_EQ(summary.duplicate_example, s.path(1) + ":2 repeats " + s.path(0) + ":7");
  ASSERT_EQ(summary.rejected_rows.size(), 1u);
  EXPECT_EQ(summary.rejected_rows[0].reason, s.path(1) + ":2: the row repeats " + s.path(0) +
                                                 ":7 field for field (duplicate_quotes: reject)");
  EXPECT_EQ(summary.files[3].rows_rejected, 1);
  EXPECT_EQ(summary.files[2].rows_rejected, 0);
}

// Enough quotes for the duplicate search to spread them over many hash
// buckets and two threads: each repeat must still name the earliest row it
// repeats (found here from a map of row text to its first line), in file
// order, with a third copy naming the first, not the second, and the lines
// counted across blank lines.
void ExpectEachRepeatNamesTheEarliestRow(int num_rows, const std::string& name) {
  const char* const kRegions[] = {"north", "south", "east"};
  std::string text = "region,item,price,heading\n";
  std::vector<std::string> rows;
  for (int k = 0; k < num_rows; ++k) {
    rows.push_back(std::string(kRegions[k % 3]) + ",i" + std::to_string(k % 500) + "," +
                   std::to_string(1 + k % 7919) + ".25,food");
    if (k % 997 == 996) rows.push_back(rows[k / 2]);
    if (k % 4999 == 4998) rows.push_back(rows[k / 2]);
  }
  std::unordered_map<std::string, int64_t> first_line;
  std::vector<std::string> expected;
  int64_t line = 1;  // the header's
  for (size_t k = 0; k < rows.size(); ++k) {
    // Blank lines now and then: quotes' lines are not their row numbers.
    if (k % 1201 == 1200) {
      text += "\n\n";
      line += 2;
    }
    text += rows[k] + "\n";
    ++line;
    const auto [it, inserted] = first_line.emplace(rows[k], line);
    if (!inserted) {
      expected.push_back(":" + std::to_string(line) + ": the row repeats line " +
                         std::to_string(it->second) + " field for field (duplicate_quotes: reject)");
    }
  }
  Sources s = MakeSources(name, {{"prices.csv", text}});
  s.config.duplicate_quotes = DuplicateQuotePolicy::kReject;
  LoadOptions options;
  options.invalid_rows = InvalidRowPolicy::kSkip;
  options.num_threads = 2;
  Survey survey;
  const LoadSummary summary = Load(s.config, &survey, options);
  ASSERT_GT(expected.size(), 30u);
  EXPECT_EQ(summary.num_duplicate_quotes, static_cast<int64_t>(expected.size()));
  ASSERT_EQ(summary.rejected_rows.size(), expected.size());
  for (size_t k = 0; k < expected.size(); ++k) {
    EXPECT_EQ(summary.rejected_rows[k].reason, s.path(0) + expected[k]);
  }
  EXPECT_EQ(survey.num_quotes, static_cast<int64_t>(rows.size() - expected.size()));
}

TEST(PriceSources, ManyRowsGiveEachRepeatTheEarliestRowItRepeats) {
  ExpectEachRepeatNamesTheEarliestRow(30000, "many_duplicates");
}

TEST(PriceSources, OverAMillionRowsGiveEachRepeatTheEarliestRowItRepeats) {
  // Over 2^20 quotes: 1,024 buckets, each filled from both threads' ranges.
  ExpectEachRepeatNamesTheEarliestRow(1100000, "million_duplicates");
}

TEST(PriceSources, ARowWithAnotherColumnIsNoDuplicate) {
  // The same region, item and price, but the second file has a column the
  // first lacks: not the same row.
  const Sources s = MakeSources("no_duplicate", {{"main.csv", kWhole},
                                                 {"rent.csv",
                                                  "region,item,price,heading,note\n"
                                                  "south,rent,650,food,register\n"}});
  Survey survey;
  EXPECT_EQ(Load(s.config, &survey).num_duplicate_quotes, 0);
}

TEST(PriceSources, AFileWithOnlyAHeaderStopsTheLoadNamingIt) {
  const Sources s = MakeSources(
      "empty_second", {{"main.csv", kWhole}, {"rent.csv", "region,item,price,heading\n"}});
  Survey survey;
  EXPECT_EQ(Load(s.config, &survey).message, s.path(1) + ": no data rows (only a header)");
}

// ---------------------------------------------------------------------------
// Quote weights.

TEST(QuoteWeights, GiveTheWeightedGeometricMeanAndLogSd) {
  // north x bread: quotes 2 (w 1) and 8 (w 3). ln mean = (ln 2 + 3 ln 8) / 4
  // = 2.5 ln 2; squared deviations (1.5 ln 2)^2 w 1 and (0.5 ln 2)^2 w 3 sum
  // to 3 (ln 2)^2; V1 = 4, V2 = 10, V1 - V2/V1 = 1.5: log_sd = sqrt(2) ln 2.
  // Computed here by hand.
  const Sources s = MakeSources("weights", {{"prices.csv",
                                             "region,item,price,heading,weight\n"
                                             "north,bread,2,food,1\n"
                                             "north,bread,8,food,3\n"
                                             "south,bread,3,food,2\n"}});
  Survey survey;
  ASSERT_EQ(Load(s.config, &survey).outcome, LoadOutcome::kOk);
  const int64_t k = CellOf(survey, "north", "bread");
  const double ln2 = std::log(2.0);
  EXPECT_NEAR(survey.cells.log_price[k], 2.5 * ln2, 1e-15);
  EXPECT_NEAR(survey.cells.log_sd[k], std::sqrt(2.0) * ln2, 1e-15);
  EXPECT_EQ(survey.cells.num_quotes[k], 2);
  ASSERT_EQ(survey.cells.weight.size(), survey.cells.size());
  EXPECT_EQ(survey.cells.weight[k], 4.0);
  EXPECT_EQ(survey.cells.weight[CellOf(survey, "south", "bread")], 2.0);
}

TEST(QuoteWeights, EqualWeightsGiveTheUnweightedCell) {
  const Sources plain = MakeSources("unweighted", {{"prices.csv", kWhole}});
  std::string weighted_text = "region,item,price,heading,weight\n";
  // Every row of kWhole with weight 2.5.
  const std::string whole = kWhole;
  for (size_t at = whole.find('\n') + 1; at < whole.size();) {
    const size_t end = whole.find('\n', at);
    weighted_text += whole.substr(at, end - at) + ",2.5\n";
    at = end + 1;
  }
  const Sources weighted = MakeSources("equal_weights", {{"prices.csv", weighted_text}});
  Survey a, b;
  Load(plain.config, &a);
  Load(weighted.config, &b);
  ASSERT_EQ(a.cells.size(), b.cells.size());
  for (size_t k = 0; k < a.cells.size(); ++k) {
    EXPECT_NEAR(a.cells.log_price[k], b.cells.log_price[k], 1e-14);
    EXPECT_NEAR(a.cells.log_sd[k], b.cells.log_sd[k], 1e-14);
  }
  EXPECT_TRUE(a.cells.weight.empty());
}

TEST(QuoteWeights, AQuoteOfAFileWithoutWeightsWeighsOne) {
  // main.csv has no weight column: its north x milk quote 1.0 weighs 1
  // beside 4.0 of weight 3 from scan.csv: ln mean = 3 ln 4 / 4 = 1.5 ln 2.
  const Sources s = MakeSources("mixed_weights", {{"main.csv",
                                                   "region,item,price,heading\n"
                                                   "north,milk,1.0,food\n"
                                                   "south,milk,1.5,food\n"},
                                                  {"scan.csv",
                                                   "region,item,price,heading,weight\n"
                                                   "north,milk,4.0,food,3\n"}});
  Survey survey;
  ASSERT_EQ(Load(s.config, &survey).outcome, LoadOutcome::kOk);
  const int64_t k = CellOf(survey, "north", "milk");
  EXPECT_NEAR(survey.cells.log_price[k], 1.5 * std::log(2.0), 1e-15);
  EXPECT_EQ(survey.cells.weight[k], 4.0);
  EXPECT_EQ(survey.cells.weight[CellOf(survey, "south", "milk")], 1.0);
}

TEST(QuoteWeights, CpdWeighsCellsBySumsOfQuoteWeightsOnlyWhenAsked) {
  // Two regions, two items. Minimising sum_i [w_ni (y_ni - a_n - b_i)^2 +
  // w_si (y_si - a_s - b_i)^2] over b_i leaves h_i (d_i - (a_s - a_n))^2 with
  // d_i = y_si - y_ni and h_i = w_ni w_si / (w_ni + w_si), so a_s - a_n =
  // sum h_i d_i / sum h_i (derived here). Cell weights: bread 4 (north) and 2
  // (south), h = 4/3; milk 1 and 1, h = 1/2. Unweighted: the mean of d.
  const Sources s = MakeSources("cpd_cell_weights", {{"prices.csv",
                                                      "region,item,price,heading,weight\n"
                                                      "north,bread,2,food,1\n"
                                                      "north,bread,8,food,3\n"
                                                      "south,bread,3,food,2\n"
                                                      "north,milk,1.0,food,1\n"
                                                      "south,milk,1.5,food,1\n"}});
  Survey survey;
  ASSERT_EQ(Load(s.config, &survey).outcome, LoadOutcome::kOk);
  const double d_bread = std::log(3.0) - 2.5 * std::log(2.0), d_milk = std::log(1.5);
  const int north = survey.regions.Find("north"), south = survey.regions.Find("south");
  ElementaryOptions options;
  HeadingParities equal = ComputeHeadingParities(survey, 0, options, {});
  EXPECT_NEAR(equal.log_parity[south] - equal.log_parity[north], (d_bread + d_milk) / 2, 1e-12);
  options.quote_weighted_cells = true;
  HeadingParities weighted = ComputeHeadingParities(survey, 0, options, {});
  EXPECT_NEAR(weighted.log_parity[south] - weighted.log_parity[north],
              (4.0 / 3 * d_bread + 0.5 * d_milk) / (4.0 / 3 + 0.5), 1e-12);
}

// A price file of one bad row 3 after a good one.
Sources BadRow(const std::string& name, const std::string& header, const std::string& row,
               const std::optional<std::string>& items = std::nullopt) {
  return MakeSources(name, {{"prices.csv", header + "\n" + "north,bread,2,food,1\n" + row + "\n"}},
                     items);
}

TEST(QuoteWeights, AMissingOrNonPositiveWeightIsARowError) {
  const std::string header = "region,item,price,heading,weight";
  const Sources zero = BadRow("weight_zero", header, "south,bread,3,food,0");
  EXPECT_EQ(FirstRejection(zero), zero.path(0) + ":3:5: weight '0' is not a positive number");
  const Sources negative = BadRow("weight_negative", header, "south,bread,3,food,-2");
  EXPECT_EQ(FirstRejection(negative),
            negative.path(0) + ":3:5: weight '-2' is not a positive number");
  const Sources empty = BadRow("weight_empty", header, "south,bread,3,food,");
  EXPECT_EQ(FirstRejection(empty), empty.path(0) + ":3:5: weight is empty");
  const Sources text = BadRow("weight_text", header, "south,bread,3,food,many");
  EXPECT_EQ(FirstRejection(text), text.path(0) + ":3:5: weight 'many' is not a number");
  const Sources inf = BadRow("weight_inf", header, "south,bread,3,food,inf");
  EXPECT_EQ(FirstRejection(inf), inf.path(0) + ":3:5: weight 'inf' is not a finite number");
}

// ---------------------------------------------------------------------------
// Quantities.

const char kItems[] =
    "item,heading,reference_quantity\n"
    "bread,food,1000\n"
    "milk,food,1\n";

TEST(Quantities, ConvertEachPriceToTheReferenceQuantity) {
  // 3.00 for 750 g at reference 1000 g: 3 x 1000 / 750 = 4.00; 2.00 for
  // 500 g: 4.00 too, so the cell is ln 4 with spread 0. Computed here by hand.
  const Sources s = MakeSources("quantity",
                                {{"prices.csv",
                                  "region,item,price,heading,quantity\n"
                                  "north,bread,3.00,food,750\n"
                                  "north,bread,2.00,food,500\n"
                                  "south,bread,5.00,food,1000\n"
                                  "south,milk,1.20,food,1\n"}},
                                kItems);
  Survey survey;
  const LoadSummary summary = Load(s.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk);
  const int64_t k = CellOf(survey, "north", "bread");
  EXPECT_EQ(survey.cells.log_price[k], std::log(4.0));
  EXPECT_EQ(survey.cells.log_sd[k], 0.0);
  EXPECT_EQ(survey.cells.log_price[CellOf(survey, "south", "bread")], std::log(5.0));
  EXPECT_TRUE(summary.warnings.empty());
}

TEST(Quantities, DuplicatesAndOutliersSeeConvertedPrices) {
  // 3.00 for 750 and 4.00 for 1000 are the same price per kilogram but not
  // the same row: no duplicate. Both enter the cell at ln 4.
  const Sources s = MakeSources("quantity_duplicates",
                                {{"prices.csv",
                                  "region,item,price,heading,quantity\n"
                                  "north,bread,3.00,food,750\n"
                                  "north,bread,4.00,food,1000\n"
                                  "north,bread,3.00,food,750\n"}},
                                kItems);
  Survey survey;
  const LoadSummary summary = Load(s.config, &survey);
  EXPECT_EQ(summary.num_duplicate_quotes, 1);
  EXPECT_EQ(summary.duplicate_example, s.path(0) + ":4 repeats line 2");
  EXPECT_EQ(survey.cells.log_max[0], std::log(4.0));
  EXPECT_EQ(survey.cells.log_min[0], std::log(4.0));
}

TEST(Quantities, AMissingOrZeroQuantityIsARowError) {
  const std::string header = "region,item,price,heading,quantity";
  const Sources zero = BadRow("quantity_zero", header, "south,bread,3,food,0", kItems);
  EXPECT_EQ(FirstRejection(zero), zero.path(0) + ":3:5: quantity '0' is not a positive number");
  const Sources empty = BadRow("quantity_empty", header, "south,bread,3,food,", kItems);
  EXPECT_EQ(FirstRejection(empty), empty.path(0) + ":3:5: quantity is empty");
  const Sources text = BadRow("quantity_text", header, "south,bread,3,food,750g", kItems);
  EXPECT_EQ(FirstRejection(text), text.path(0) + ":3:5: quantity '750g' is not a number");
  // Each figure within 1e-30 to 1e30, the price at the reference quantity
  // (1000) not: 1e20 x 1000 / 1e-15 = 9.999999999999998e+37 (Python's float arithmetic).
  const Sources range = BadRow("quantity_range", header, "south,bread,1e20,food,1e-15", kItems);
  EXPECT_EQ(FirstRejection(range),
            range.path(0) +
                ":3:5: price '1e20' for quantity '1e-15' is out of range at the reference "
                "quantity (found 9.999999999999998e+37, outside 1e-30 to 1e30)");
}

TEST(Quantities, AnItemWithoutReferenceQuantityIsPricedPerUnitWithAWarning) {
  // rye has no reference_quantity: 3.00 for 750 is 0.004 per gram.
  const Sources s = MakeSources("no_reference",
                                {{"prices.csv",
                                  "region,item,price,heading,quantity\n"
                                  "north,rye,3.00,food,750\n"
                                  "south,rye,2.00,food,400\n"
                                  "south,bread,5.00,food,1000\n"}},
                                "item,heading,reference_quantity\n"
                                "bread,food,1000\n"
                                "rye,food,\n");
  Survey survey;
  const LoadSummary summary = Load(s.config, &survey);
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk);
  EXPECT_EQ(survey.cells.log_price[CellOf(survey, "north", "rye")], std::log(3.00 / 750));
  ASSERT_EQ(summary.warnings.size(), 1u);
  EXPECT_EQ(summary.warnings[0],
            "prices of 1 item (rye; 2 quotes) are per 1 unit of their quantity column: the item "
            "has no reference_quantity in " +
                s.config.survey.items +
                "; parities do not depend on this unless some quotes of the item carry no "
                "quantity");
}

TEST(Quantities, AnInvalidReferenceQuantityIsARowErrorOfItemsCsv) {
  const Sources s = MakeSources("bad_reference", {{"prices.csv", kWhole}},
                                "item,heading,reference_quantity\n"
                                "bread,food,-1\n");
  Survey survey;
  const LoadSummary summary = Load(s.config, &survey);
  ASSERT_FALSE(summary.rejected_rows.empty());
  EXPECT_EQ(summary.rejected_rows[0].reason,
            s.config.survey.items + ":2:3: reference_quantity '-1' is not a positive number");
}

// ---------------------------------------------------------------------------
// The configuration.

RunConfig ParseConfig(const std::string& yaml, std::string* error) {
  RunConfig config;
  *error = "";
  ParseRunConfig(yaml, "/cfg/run.yaml", &config, error);
  return config;
}

TEST(PriceSourcesConfig, ReadsAListOfPathsAndMappingsWithColumns) {
  std::string error;
  const RunConfig config = ParseConfig(
      "survey:\n"
      "  prices:\n"
      "    - main.csv\n"
      "    - {path: rent.csv, columns: {region: area_code, price: amount}}\n"
      "    - path: tariffs.csv\n"
      "      delimiter: ';'\n"
      "      decimal: ','\n"
      "  expenditure: e.csv\n"
      "cpd_cell_weights: Quote-Weights\n",
      &error);
  ASSERT_EQ(error, "");
  ASSERT_EQ(config.survey.prices.size(), 3u);
  EXPECT_EQ(config.survey.prices[0].path, "/cfg/main.csv");
  EXPECT_EQ(config.survey.prices[1].path, "/cfg/rent.csv");
  EXPECT_EQ(config.survey.prices[1].HeaderOf("region"), "area_code");
  EXPECT_EQ(config.survey.prices[1].HeaderOf("price"), "amount");
  EXPECT_EQ(config.survey.prices[1].HeaderOf("item"), "item");
  EXPECT_EQ(config.survey.prices[2].format.delimiter, ';');
  EXPECT_EQ(config.survey.prices[2].format.decimal, ',');
  EXPECT_EQ(config.cpd_cell_weights, CpdCellWeights::kQuoteWeights);
  EXPECT_EQ(RunConfig().cpd_cell_weights, CpdCellWeights::kEqual);
}

TEST(PriceSourcesConfig, RefusesBadListsAndMappingsNamingTheKey) {
  std::string error;
  ParseConfig("survey:\n  prices: []\n  expenditure: e.csv\n", &error);
  EXPECT_EQ(error, "/cfg/run.yaml:2:11: 'survey.prices' lists no files");
  ParseConfig("survey:\n  prices: [a.csv, b.csv, a.csv]\n  expenditure: e.csv\n", &error);
  EXPECT_EQ(error,
            "/cfg/run.yaml:2:26: survey.prices[2] '/cfg/a.csv' is already listed as "
            "survey.prices[0]");
  ParseConfig(
      "survey:\n  prices: [a.csv, {path: b.csv, columns: {prise: cost}}]\n"
      "  expenditure: e.csv\n",
      &error);
  EXPECT_EQ(error,
            "/cfg/run.yaml:2:43: unknown key 'survey.prices[1].columns.prise'; did you mean "
            "'survey.prices[1].columns.price'?");
  ParseConfig("survey:\n  prices: {path: b.csv, columns: {region: item}}\n  expenditure: e.csv\n",
              &error);
  EXPECT_EQ(error,
            "/cfg/run.yaml:2:34: survey.prices.columns: columns 'region' and 'item' would both "
            "read the file's column 'item'");
  ParseConfig("survey:\n  prices: {path: b.csv, columns: [region]}\n  expenditure: e.csv\n",
              &error);
  EXPECT_EQ(error,
            "/cfg/run.yaml:2:34: 'survey.prices.columns' must be a mapping of our column names "
            "to the file's headers, e.g. {region: area_code, price: amount}");
  ParseConfig("survey:\n  prices: [a.csv, {delimiter: ';'}]\n  expenditure: e.csv\n", &error);
  EXPECT_EQ(error, "/cfg/run.yaml:2:19: missing key 'survey.prices[1].path'");
  ParseConfig("survey:\n  prices: a.csv\n  expenditure: e.csv\ncpd_cell_weights: quantity\n",
              &error);
  EXPECT_EQ(error,
            "/cfg/run.yaml:4:19: cpd_cell_weights 'quantity' is not one of: equal, "
            "quote-weights");
}

TEST(PriceSourcesConfig, CpdCellWeightsNamesReadBackCaseInsensitively) {
  for (const std::string& name : CpdCellWeightsNames()) {
    CpdCellWeights value = CpdCellWeights::kEqual;
    ASSERT_TRUE(FromString(ToLower(name) == name ? " " + name + " " : name, &value));
    EXPECT_EQ(ToString(value), name);
  }
  CpdCellWeights value;
  EXPECT_TRUE(FromString("EQUAL", &value));
  EXPECT_EQ(value, CpdCellWeights::kEqual);
  EXPECT_FALSE(FromString("sum", &value));
}

// At least `bytes` of quote rows of the three regions of kExpenditure, one
// line each, with a header; adds their number to *num_rows.
std::string PlainPrices(size_t bytes, int64_t* num_rows) {
  const char* regions[] = {"north", "south", "east"};
  std::string plain = "region,item,price,heading\n";
  int row = 0;
  for (; plain.size() < bytes; ++row) {
    plain += std::string(regions[row % 3]) + ",item" + std::to_string(row % 40) + "," +
             std::to_string(10 + row % 89) + ",food\n";
  }
  *num_rows += row;
  return plain;
}

// Loads in the smallest blocks (64 KiB), so that a file of a few MB is read
// in tens of them.
LoadSummary LoadInSmallestBlocks(const RunConfig& config, Survey* survey) {
  LoadOptions options;
  options.block_bytes = 1 << 16;
  return Load(config, survey, options);
}

// A later file that brings a weight column finds its array reserved with
// the others: a first file of 40 blocks leaves room for the second's few
// rows, and the weights (one per quote of both files) do not move as the
// second file's blocks come (num_quote_array_moves counts moved arrays).
TEST(PriceSources, ReservesTheWeightsOfALaterFileWithTheQuotes) {
  const char* regions[] = {"north", "south", "east"};
  int64_t num_rows = 0;
  const std::string plain = PlainPrices(40 << 16, &num_rows);
  std::string weighted = "region,item,price,heading,weight\n";
  for (int row = 0; weighted.size() < 3 << 15; ++row, ++num_rows) {
    weighted += std::string(regions[row % 3]) + ",item" + std::to_string(row % 40) + ",12.5,food," +
                std::to_string(1 + row % 7) + "\n";
  }
  const Sources s = MakeSources("later_weights", {{"prices.csv", plain}, {"weighted.csv", weighted}});
  Survey survey;
  const LoadSummary summary = LoadInSmallestBlocks(s.config, &survey);  // the second file is two blocks
  ASSERT_EQ(summary.outcome, LoadOutcome::kOk) << summary.message;
  EXPECT_EQ(survey.num_quotes, num_rows);
  EXPECT_FALSE(survey.cells.weight.empty());
  EXPECT_EQ(summary.num_quote_array_moves, 0);
}

// Reads two price files of plain rows, of at least `first_bytes` and
// `second_bytes`, in the smallest blocks; returns how often the quote
// arrays moved (-1 when the load failed or lost rows).
int MovesReadingTwoFiles(const std::string& name, size_t first_bytes, size_t second_bytes) {
  int64_t num_rows = 0;
  const std::string first = PlainPrices(first_bytes, &num_rows);
  const std::string second = PlainPrices(second_bytes, &num_rows);
  const Sources s = MakeSources(name, {{"prices.csv", first}, {"more.csv", second}});
  Survey survey;
  const LoadSummary summary = LoadInSmallestBlocks(s.config, &survey);
  if (summary.outcome != LoadOutcome::kOk || survey.num_quotes != num_rows) return -1;
  return summary.num_quote_array_moves;
}

// The first file's reservation holds the later files' quotes too (from
// their sizes), so a second file of a tenth as many rows, beyond the 5 %
// the estimate leaves over, does not move the quotes of the first; nor
// does a large second file after a small first one (40 blocks after half
// a block). Before, each second file's first block moved them once.
TEST(PriceSources, ReservesTheQuotesOfTheLaterFilesAtTheFirst) {
  EXPECT_EQ(MovesReadingTwoFiles("later_small", 40 << 16, 4 << 16), 0);
  EXPECT_EQ(MovesReadingTwoFiles("later_large", 1 << 15, 40 << 16), 0);
}

}  // namespace
}  // namespace paritas
