// End-to-end runs of `paritas carry` through the real executable: a
// two-region survey computed by hand, the identity case on the demo, the
// drift against a new benchmark on generated data, and refusals with their
// exact messages.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <map>
#include <string>

#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "paritas/use/publication.h"
#include "synthetic_survey.h"
#include "test_util.h"

namespace paritas {
namespace {

using testing::MakeTempDir;
using testing::ReadTextFile;
using testing::RunCli;
using testing::SourcePath;
using testing::WriteRunFile;
using testing::WriteTextFile;

using Table = std::map<std::pair<std::string, std::string>, double>;

// Column `value` of a run table by (first column, column `key2`).
Table ReadColumn(const std::string& path, const std::string& key2, const std::string& value) {
  Table out;
  const std::string text = ReadTextFile(path);
  CsvReader reader(text);
  CsvRecord record;
  EXPECT_TRUE(reader.Next(&record)) << path;
  const CsvHeader header(record.fields);
  const int k = header.Find(key2), v = header.Find(value);
  EXPECT_GE(k, 0);
  EXPECT_GE(v, 0);
  while (reader.Next(&record)) {
    double x = std::nan("");
    if (!record.fields[v].empty()) ParseNumber(record.fields[v], &x);
    out[{std::string(record.fields[0]), std::string(record.fields[k])}] = x;
  }
  return out;
}

Table Parities(const std::string& dir) {
  return ReadColumn(dir + "/parities.csv", "region", "parity");
}

// Two regions, two headings of one item each (so each heading parity is the
// price ratio), reference mean, geks-fisher.
std::string WriteHandSurvey(const std::string& dir) {
  WriteTextFile(dir + "/prices.csv",
                "region,item,price\na,i1,10\nb,i1,12\na,i2,20\nb,i2,20\n");
  WriteTextFile(dir + "/items.csv", "item,heading\ni1,h1\ni2,h2\n");
  WriteTextFile(dir + "/expenditure.csv",
                "region,heading,expenditure\na,h1,60\na,h2,40\nb,h1,50\nb,h2,50\n");
  WriteTextFile(dir + "/config.yaml",
                "survey:\n  prices: prices.csv\n  items: items.csv\n  expenditure: "
                "expenditure.csv\nclassification:\n  all: [h1, h2]\nreference: mean\n"
                "aggregation: geks-fisher\n");
  // a: h1 110 (its own row), h2 100 (from all); b: h1 121, h2 104 (from all).
  // The 2025 rows are of another period and must be left aside.
  WriteTextFile(dir + "/indices.csv",
                "region,node,period,index\na,h1,2026,110\na,all,2026,100\nb,h1,2026,121\n"
                "b,all,2026,104\na,all,2025,101\nb,all,2025,199\n");
  std::string out, err;
  EXPECT_EQ(RunCli("compute " + dir + "/config.yaml --output " + dir + "/bench", &out, &err), 0)
      << err;
  return dir + "/bench";
}

// By hand: the carried ratios b/a are h1: 1.2 x 121/110 = 1.32 and h2:
// 1 x 104/100 = 1.04 (the country's index cancels in the ratio). With shares
// a (0.6, 0.4) and b (0.5, 0.5): Laspeyres = 0.6 x 1.32 + 0.4 x 1.04 =
// 1.208, Paasche = 1 / (0.5 / 1.32 + 0.5 / 1.04), Fisher F = sqrt(L P); with
// two regions GEKS is the Fisher index, and under reference mean a = 100 /
// sqrt(F), b = 100 sqrt(F).
TEST(CarryCommand, CarriesATwoRegionSurveyAsComputedByHand) {
  const std::string dir = MakeTempDir("cli_carry_hand");
  const std::string bench = WriteHandSurvey(dir);
  std::string out, err;
  ASSERT_EQ(RunCli("carry " + bench + " --indices " + dir + "/indices.csv --period 2026 --output " +
                       dir + "/carried",
                   &out, &err),
            0)
      << err;
  EXPECT_EQ(out.rfind("EXTRAPOLATED: every parity of this run is extrapolated", 0), 0u) << out;
  EXPECT_NE(err.find("extrapolated parities"), std::string::npos) << err;
  const Table p = Parities(dir + "/carried");
  PARITAS_EXPECT_CLOSE((p.at({"h1", "a"})), 100.0 / std::sqrt(1.32), 1e-12);
  PARITAS_EXPECT_CLOSE((p.at({"h1", "b"})), 100.0 * std::sqrt(1.32), 1e-12);
  PARITAS_EXPECT_CLOSE((p.at({"h2", "b"})), 100.0 * std::sqrt(1.04), 1e-12);
  const double laspeyres = 0.6 * 1.32 + 0.4 * 1.04;
  const double paasche = 1.0 / (0.5 / 1.32 + 0.5 / 1.04);
  const double fisher = std::sqrt(laspeyres * paasche);
  PARITAS_EXPECT_CLOSE((p.at({"all", "a"})), 100.0 / std::sqrt(fisher), 1e-12);
  PARITAS_EXPECT_CLOSE((p.at({"all", "b"})), 100.0 * std::sqrt(fisher), 1e-12);
  // The country's index of h1 with the benchmark's weights 60 and 50.
  const Table country =
      ReadColumn(dir + "/carried/carried_headings.csv", "region", "country_index");
  PARITAS_EXPECT_CLOSE((country.at({"h1", "a"})),
                       100.0 * std::exp((60 * std::log(1.10) + 50 * std::log(1.21)) / 110), 1e-12);
  // Flagged on every row, in run.json and on the report.
  const std::string parities = ReadTextFile(dir + "/carried/parities.csv");
  EXPECT_EQ(testing::CountOf(parities, ",2026\n"), 6u) << parities;
  EXPECT_NE(parities.find(",warnings,extrapolated_to\n"), std::string::npos);
  const std::string record = ReadTextFile(dir + "/carried/run.json");
  EXPECT_NE(record.find("\"command\": \"carry\""), std::string::npos);
  EXPECT_NE(record.find("\"extrapolated\": true"), std::string::npos);
  const std::string report = ReadTextFile(dir + "/carried/report.html");
  EXPECT_NE(report.find("<h2>Extrapolated parities</h2>"), std::string::npos);
  EXPECT_NE(report.find("<dt>Carried to a later period (in use)</dt>"), std::string::npos);
}

// The later period's expenditure: shares a (0.3, 0.7), b (0.8, 0.2).
// The root's region x region tables grow with regions squared: a carried
// run writes them, as compute does, only up to matrices_up_to_regions.
TEST(CarryCommand, WritesTheRootsPairTablesOnlyUpToTheSizeLimit) {
  const std::string dir = MakeTempDir("cli_carry_matrix_limit");
  std::string bench = WriteHandSurvey(dir);
  std::string out, err;
  const std::string carry = "carry " + bench + " --indices " + dir + "/indices.csv --period 2026";
  ASSERT_EQ(RunCli(carry + " --output " + dir + "/small", &out, &err), 0) << err;
  EXPECT_NE(ReadTextFile(dir + "/small/matrix/all.csv"), "");
  EXPECT_NE(ReadTextFile(dir + "/small/bilateral/all.csv"), "");
  WriteTextFile(dir + "/config.yaml",
                ReadTextFile(dir + "/config.yaml") + "matrices_up_to_regions: 1\n");
  ASSERT_EQ(RunCli("compute " + dir + "/config.yaml --output " + dir + "/bench", &out, &err), 0)
      << err;
  ASSERT_EQ(RunCli(carry + " --output " + dir + "/large", &out, &err), 0) << err;
  EXPECT_NE(ReadTextFile(dir + "/large/parities.csv"), "");
  EXPECT_EQ(ReadTextFile(dir + "/large/matrix/all.csv"), "");
  EXPECT_EQ(ReadTextFile(dir + "/large/bilateral/all.csv"), "");
}

TEST(CarryCommand, AggregatesWithTheLaterPeriodsWeightsWhenGiven) {
  const std::string dir = MakeTempDir("cli_carry_later");
  const std::string bench = WriteHandSurvey(dir);
  WriteTextFile(dir + "/later.csv",
                "region,heading,expenditure\na,h1,30\na,h2,70\nb,h1,80\nb,h2,20\n");
  std::string out, err;
  ASSERT_EQ(RunCli("carry " + bench + " --indices " + dir + "/indices.csv --period 2026 " +
                       "--expenditure " + dir + "/later.csv --no-report --output " + dir + "/c",
                   &out, &err),
            0)
      << err;
  const double laspeyres = 0.3 * 1.32 + 0.7 * 1.04;
  const double paasche = 1.0 / (0.8 / 1.32 + 0.2 / 1.04);
  const Table p = Parities(dir + "/c");
  PARITAS_EXPECT_CLOSE((p.at({"all", "b"})), 100.0 * std::sqrt(std::sqrt(laspeyres * paasche)),
                       1e-12);
  EXPECT_NE(out.find("aggregated with the later period's expenditure weights"), std::string::npos);
}

TEST(CarryCommand, RefusesWhatItCannotCarryWithExactMessages) {
  const std::string dir = MakeTempDir("cli_carry_bad");
  const std::string bench = WriteHandSurvey(dir);
  std::string out, err;
  // Two periods and none chosen.
  EXPECT_EQ(RunCli("carry " + bench + " --indices " + dir + "/indices.csv --output " + dir + "/c",
                   &out, &err),
            1);
  EXPECT_EQ(err, "paritas: error: " + dir +
                     "/indices.csv holds 2 periods (2026, 2025); choose one with --period\n");
  // b has no index for h2 in 2025's file below.
  WriteTextFile(dir + "/partial.csv", "region,node,period,index\na,all,2026,101\nb,h1,2026,103\n");
  EXPECT_EQ(RunCli("carry " + bench + " --indices " + dir + "/partial.csv --output " + dir + "/c",
                   &out, &err),
            1);
  EXPECT_EQ(err,
            "paritas: error: no price index for region 'b' in heading 'h2' (nor for any aggregate "
            "above it), where the benchmark has a parity; give the indices, or --missing-index "
            "country to move them as the country does\n");
  // Under rule country it is carried and the warning names it.
  ASSERT_EQ(RunCli("carry " + bench + " --indices " + dir + "/partial.csv --missing-index country "
                       "--no-report --output " + dir + "/c",
                   &out, &err),
            0)
      << err;
  EXPECT_NE(err.find("no price index for region 'b' in heading 'h2' (nor above it): moved as the "
                     "country's (index 101.0000, --missing-index country), so its relative "
                     "parity is the benchmark's"),
            std::string::npos)
      << err;
  EXPECT_EQ(RunCli("carry " + bench + " --indices " + dir + "/partial.csv --missing-index guess "
                       "--output " + dir + "/c",
                   &out, &err),
            1);
  EXPECT_EQ(err, "paritas: error: --missing-index must be one of: stop, country; found 'guess'\n");
  // The benchmark's survey files must be those it read.
  const std::string prices = ReadTextFile(dir + "/prices.csv");
  WriteTextFile(dir + "/prices.csv", prices + "b,i2,21\n");
  EXPECT_EQ(RunCli("carry " + bench + " --indices " + dir + "/partial.csv --output " + dir + "/e",
                   &out, &err),
            1);
  EXPECT_EQ(err.rfind("paritas: error: " + dir + "/prices.csv: not the prices file the benchmark "
                      "run read (SHA-256 ",
                      0),
            0u)
      << err;
  EXPECT_NE(err.find("now); carry needs the benchmark's own survey\n"), std::string::npos) << err;
  WriteTextFile(dir + "/prices.csv", prices);
  // The benchmark's spending is read as compute wrote it: a figure beyond
  // the survey's range summed to infinity and carried every parity as NaN.
  const std::string parities = ReadTextFile(bench + "/parities.csv");
  const size_t row = parities.find("\nh1,heading,a,") + 1;
  size_t field = row;
  for (int k = 0; k < 4; ++k) field = parities.find(',', field) + 1;
  const int line = 1 + static_cast<int>(std::count(parities.begin(), parities.begin() + row, '\n'));
  for (const auto& [figure, problem] :
       {std::pair<std::string, std::string>{"1e308", "is beyond 1e30, where ratios between regions "
                                                      "and their products overflow or lose digits; "
                                                      "compute writes none beyond it; is the file as "
                                                      "it wrote it?"},
        {"-5", "is negative"}}) {
    WriteRunFile(bench, "parities.csv",
                 parities.substr(0, field) + figure + parities.substr(parities.find(',', field)));
    EXPECT_EQ(RunCli("carry " + bench + " --indices " + dir + "/partial.csv --missing-index country "
                         "--output " + dir + "/f",
                     &out, &err),
              1);
    EXPECT_EQ(err, "paritas: error: " + bench + "/parities.csv:" + std::to_string(line) +
                       ":5: expenditure '" + figure + "' " + problem + "\n");
  }
  // Heading parities within the range read back (1e-200 to 1e200) but so
  // far apart that the aggregation's ratios overflow: stopped with the
  // figures (it said the regions were "not linked"; below, the range's edge).
  std::string apart = parities;
  for (const auto& [key, figure] : {std::pair<std::string, std::string>{"\nh1,heading,a,", "1e-199"},
                                    {"\nh1,heading,b,", "1e199"}}) {
    const size_t at = apart.find(key) + key.size();
    apart.replace(at, apart.find(',', at) - at, figure);
  }
  WriteRunFile(bench, "parities.csv", apart);
  EXPECT_EQ(RunCli("carry " + bench + " --indices " + dir + "/indices.csv --period 2026 --output " +
                       dir + "/g",
                   &out, &err),
            1);
  EXPECT_EQ(err,
            "paritas: error: region 'a', heading 'h1': the carried parity 9.58e-200 (the "
            "benchmark's 1e-199 times the index 110.00 over the country's 114.87) is nearer 0 "
            "than 1e-60, where ratios between regions overflow in the aggregation; check the "
            "benchmark's parities.csv and the units of the index file\n");
  WriteRunFile(bench, "parities.csv", parities);
  // A parities.csv changed after the benchmark run (the record not updated)
  // is refused before a row is read.
  WriteTextFile(bench + "/parities.csv", apart);
  EXPECT_EQ(RunCli("carry " + bench + " --indices " + dir + "/indices.csv --period 2026 --output " +
                       dir + "/g",
                   &out, &err),
            1);
  EXPECT_EQ(err.rfind("paritas: error: " + bench + "/parities.csv: not the file its run wrote (" +
                          bench + "/run.json records SHA-256 ",
                      0),
            0u)
      << err;
  EXPECT_NE(err.find("...): it was changed or replaced after the run, so its figures are not "
                     "that run's; run the command that wrote the folder again, or restore the "
                     "folder whole\n"),
            std::string::npos)
      << err;
  WriteRunFile(bench, "parities.csv", parities);
  // A carried run is not a benchmark.
  EXPECT_EQ(RunCli("carry " + dir + "/c --indices " + dir + "/partial.csv --output " + dir + "/d",
                   &out, &err),
            1);
  EXPECT_EQ(err, "paritas: error: " + dir +
                     "/c/run.json: a record of 'carry', not of compute; carry from the "
                     "benchmark's own output folder of 'paritas compute' (indices from its period "
                     "to the later one)\n");
}

// Carried parities near the edge of the range carry (1e-60 to 1e60), a and b
// at opposite extremes in both headings, under every aggregation method: the
// run finishes and its Paasche-Laspeyres spreads are finite (the spread
// warning is there). At 1e78 the spreads overflowed and were lost without a
// word, and the spanning tree stopped as "not linked"; the range keeps such
// parities out.
TEST(CarryCommand, EveryMethodAggregatesParitiesAtTheEdgeOfTheCarriedRange) {
  const std::string dir = MakeTempDir("cli_carry_edge");
  const std::string bench = WriteHandSurvey(dir);
  const std::string config = ReadTextFile(dir + "/config.yaml");
  for (const std::string method : {"geks-fisher", "geks-tornqvist", "weighted-cpd", "spanning-tree",
                                   "geary-khamis", "ikle-dikhanov-balk"}) {
    const std::string yaml = dir + "/" + method + ".yaml";
    const std::string with_method = config.substr(0, config.find("aggregation: ")) +
                                    "aggregation: " + method + "\n";
    WriteTextFile(yaml, with_method);
    std::string out, err;
    ASSERT_EQ(RunCli("compute " + yaml + " --no-report --output " + dir + "/b-" + method, &out, &err),
              0)
        << err;
    std::string parities = ReadTextFile(dir + "/b-" + method + "/parities.csv");
    for (const auto& [key, figure] :
         {std::pair<std::string, std::string>{"\nh1,heading,a,", "1e-59"}, {"\nh1,heading,b,", "1e59"},
          {"\nh2,heading,a,", "1e59"}, {"\nh2,heading,b,", "1e-59"}}) {
      const size_t at = parities.find(key) + key.size();
      parities.replace(at, parities.find(',', at) - at, figure);
    }
    WriteRunFile(dir + "/b-" + method, "parities.csv", parities);
    EXPECT_EQ(RunCli("carry " + dir + "/b-" + method + " --indices " + dir +
                         "/indices.csv --period 2026 --no-report --output " + dir + "/c-" + method,
                     &out, &err),
              0)
        << method << ": " << err;
    EXPECT_NE(err.find("aggregate 'all', region 'a': Paasche-Laspeyres spread "), std::string::npos)
        << method << ": " << err;
  }
}

// Identity: every region's index equal (one row on the root per region)
// leaves every node's parity where the benchmark has it.
TEST(CarryCommand, EqualIndicesLeaveTheDemosParitiesUnchanged) {
  const std::string dir = MakeTempDir("cli_carry_identity");
  std::string out, err;
  ASSERT_EQ(RunCli("compute " + SourcePath("config/demo.yaml") + " --no-report --output " + dir +
                       "/bench",
                   &out, &err),
            0)
      << err;
  std::string indices = "region,node,period,index\n";
  for (const char* r : {"cap", "har", "ost", "kel", "bri", "gal", "sel", "zel", "dun", "net",
                        "yar", "vel", "tar", "fen", "ird", "quo"}) {
    indices += std::string(r) + ",all,2026,107.3\n";
  }
  WriteTextFile(dir + "/same.csv", indices);
  ASSERT_EQ(RunCli("carry " + dir + "/bench --indices " + dir + "/same.csv --no-report --output " +
                       dir + "/carried",
                   &out, &err),
            0)
      << err;
  const Table before = Parities(dir + "/bench"), after = Parities(dir + "/carried");
  ASSERT_EQ(before.size(), after.size());
  int compared = 0;
  for (const auto& [key, parity] : before) {
    PARITAS_EXPECT_CLOSE(after.at(key), parity, 1e-12) << key.first << " " << key.second;
    compared += std::isfinite(parity) ? 1 : 0;
  }
  EXPECT_GT(compared, 16 * 30);
  // publish reads the carried folder like a compute run's and says it is
  // extrapolated in every title and first among the cautions.
  PublishOptions publish;
  publish.run_dir = dir + "/carried";
  publish.csv_path = dir + "/levels.csv";
  PublishSummary published;
  ASSERT_TRUE(Publish(publish, &published)) << published.message;
  EXPECT_EQ(published.tables[0].title,
            "Price level indices (geometric mean of the regions = 100), extrapolated to period "
            "'2026' by price indices (not measured)");
  const std::vector<std::string> notes = published.notes.Lines(1, PublicationOrder::kCode);
  const auto cautions = std::find(notes.begin(), notes.end(), "Cautions");
  ASSERT_NE(cautions, notes.end());
  EXPECT_EQ((cautions + 1)->rfind("Extrapolated: every parity of this run is extrapolated", 0),
            0u);
  // deflate says so on the terminal.
  ASSERT_EQ(RunCli("deflate --parities " + dir + "/carried --input " +
                       SourcePath("data/demo/wages.csv") + " --value-column hourly_wage " +
                       "--output " + dir + "/wages_real.csv",
                   &out, &err),
            0)
      << err;
  EXPECT_NE(out.find("note: the parities of " + dir + "/carried are extrapolated to period "
                     "'2026' (paritas carry): every parity"),
            std::string::npos)
      << out;
}

// Generated data: year 1 is year 0 with every quote of region r in heading h
// multiplied by m_rh, and region 0's quotes in heading 0 by a further 1.1
// that the indices miss. Carrying year 0 with the indices 100 m_rh, the drift
// against year 1's benchmark is ln 1.1 (1 - 1/R) for region 0 in heading 0
// and -ln 1.1 / R for the others there (reference mean over R regions), and 0
// in the other headings, up to the 6 significant digits prices are written with.
TEST(CarryCommand, DriftAgainstANewBenchmarkIsWhatTheIndicesMissed) {
  const std::string dir = MakeTempDir("cli_carry_drift");
  synthetic::SyntheticOptions options;
  options.num_regions = 12;
  options.num_headings = 6;
  options.items_per_heading = 6;
  options.coverage = 0.8;
  options.num_groups = 2;
  options.seed = 7;
  synthetic::SyntheticSurvey year0 = synthetic::Generate(options);
  synthetic::SyntheticSurvey year1 = year0;
  const int num_regions = options.num_regions;
  const auto movement = [](int r, int h) { return std::exp(0.03 * std::sin(1.0 + r * 7 + h * 3)); };
  for (size_t q = 0; q < year1.quote_price.size(); ++q) {
    const int r = year1.quote_region[q], h = year1.item_heading[year1.quote_item[q]];
    year1.quote_price[q] *= movement(r, h) * (r == 0 && h == 0 ? 1.1 : 1.0);
  }
  std::string error, out, err;
  ASSERT_TRUE(synthetic::WriteSurvey(year0, dir + "/y0", &error)) << error;
  ASSERT_TRUE(synthetic::WriteSurvey(year1, dir + "/y1", &error)) << error;
  std::string indices = "region,node,period,index\n";
  char number[40];
  for (int r = 0; r < num_regions; ++r) {
    for (int h = 0; h < options.num_headings; ++h) {
      std::snprintf(number, sizeof(number), "%.17g", 100.0 * movement(r, h));
      indices += year0.regions[r] + "," + year0.headings[h] + ",y1," + number + "\n";
    }
  }
  WriteTextFile(dir + "/indices.csv", indices);
  for (const char* year : {"y0", "y1"}) {
    ASSERT_EQ(RunCli("compute " + dir + "/" + year + "/config.yaml --no-report --output " + dir +
                         "/" + year + "/out",
                     &out, &err),
              0)
        << err;
  }
  ASSERT_EQ(RunCli("carry " + dir + "/y0/out --indices " + dir + "/indices.csv --no-report " +
                       "--output " + dir + "/carried",
                   &out, &err),
            0)
      << err;
  ASSERT_EQ(RunCli("compare " + dir + "/carried " + dir + "/y1/out --output " + dir + "/drift",
                   &out, &err),
            0)
      << err;
  EXPECT_NE(out.find("the old run is extrapolated (paritas carry) from benchmark run "),
            std::string::npos)
      << out;
  const Table drift = ReadColumn(dir + "/drift/changes.csv", "region", "log_change");
  const double shock = std::log(1.1);
  for (int r = 0; r < num_regions; ++r) {
    const std::string& region = year0.regions[r];
    const double expected = r == 0 ? shock * (1.0 - 1.0 / num_regions) : -shock / num_regions;
    EXPECT_NEAR(drift.at({year0.headings[0], region}), expected, 2e-5) << region;
    EXPECT_NEAR(drift.at({year0.headings[1], region}), 0.0, 2e-5) << region;
  }
  // At the root region 0 drifts up, by less than in its heading.
  const double root = drift.at({"all", year0.regions[0]});
  EXPECT_GT(root, 1e-3);
  EXPECT_LT(root, shock);
}

}  // namespace
}  // namespace paritas
