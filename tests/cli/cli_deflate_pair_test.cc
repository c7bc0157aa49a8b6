// End-to-end runs of `paritas deflate` and `paritas pair` through the real
// executable: exit codes, exact messages for bad options and bad rows.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <sstream>
#include <string>
#include <utility>
#include <vector>

#include "paritas/aggregation/aggregation_method.h"
#include "paritas/elementary/elementary_method.h"
#include "test_util.h"

namespace paritas {
namespace {

using testing::CountOf;
using testing::MakeTempDir;
using testing::ReadTextFile;
using testing::RunCli;
using testing::SourcePath;
using testing::WriteRunFile;
using testing::WriteTextFile;

// A parities folder with the BEA technical note's two regions (parities 120
// and 90) and an input file of `rows`.
std::string MakeCase(const std::string& name, const std::string& rows) {
  const std::string dir = MakeTempDir(name);
  WriteTextFile(dir + "/p/parities.csv",
                "node,kind,region,parity\nall,aggregate,a,120.000000\nall,aggregate,b,90.000000\n");
  WriteTextFile(dir + "/in.csv", "id,region,income\n" + rows);
  return dir;
}

std::string DeflateArgs(const std::string& dir) {
  return "deflate --parities " + dir + "/p --input " + dir + "/in.csv --output " + dir +
         "/out.csv --value-column income";
}

TEST(DeflateCommand, DeflatesTheBeaExampleToEqualRealIncomes) {
  const std::string dir = MakeCase("cli_deflate_bea", "1,a,12000\n2,b,9000\n");
  std::string out, err;
  EXPECT_EQ(RunCli(DeflateArgs(dir) + " --with-parity", &out, &err), 0) << err;
  EXPECT_EQ(
      ReadTextFile(dir + "/out.csv"),
      "id,region,income,income_real,parity\n1,a,12000,10000,120\n2,b,9000,10000,90\n");
  EXPECT_NE(out.find(": 2 written, 0 rejected"), std::string::npos) << out;
  EXPECT_EQ(err, "");
}

TEST(DeflateCommand, StopsOnABadRowWithItsMessage) {
  const std::string dir = MakeCase("cli_deflate_stop", "1,a,12000\n2,b,12 000\n");
  std::string out, err;
  EXPECT_EQ(RunCli(DeflateArgs(dir), &out, &err), 1);
  const std::string in = dir + "/in.csv";
  EXPECT_EQ(
      err, in +
               ":3:3: income '12 000' is not a number; thousands separators are not allowed (write "
               "12000)\n"
               "paritas: error: 1 invalid row in " +
               in + "; nothing written; fix them, or pass --invalid-rows skip to leave them out\n");
  EXPECT_FALSE(std::filesystem::exists(dir + "/out.csv"));
}

TEST(DeflateCommand, SkipsBadRowsAndReportsThem) {
  const std::string dir = MakeCase("cli_deflate_skip", "1,a,12000\n2,q,1\n3,b,-4\n4,b,9000\n");
  std::string out, err;
  EXPECT_EQ(RunCli(DeflateArgs(dir) + " --invalid-rows skip", &out, &err), 0) << err;
  EXPECT_NE(out.find(": 2 written, 2 rejected"), std::string::npos) << out;
  EXPECT_NE(out.find("rejected rows (listed in " + dir + "/out_rejected.csv):\n"),
            std::string::npos)
      << out;
  const std::string rejected = ReadTextFile(dir + "/out_rejected.csv");
  EXPECT_EQ(rejected.substr(0, rejected.find('\n')), "file,line,reason,raw");
  EXPECT_EQ(std::count(rejected.begin(), rejected.end(), '\n'), 3);
  EXPECT_EQ(ReadTextFile(dir + "/out.csv"),
            "id,region,income,income_real\n1,a,12000,10000\n4,b,9000,10000\n");
}

TEST(DeflateCommand, RefusesBadOptionsWithExitCodeOne) {
  const std::string dir = MakeCase("cli_deflate_options", "1,a,1\n");
  const std::string base =
      "deflate --parities " + dir + "/p --input " + dir + "/in.csv --output " + dir + "/o.csv";
  struct Case {
    std::string arguments;
    std::string message;
  };
  const Case cases[] = {
      {base, "paritas: error: --value-column is required\nrun 'paritas --help' for usage\n"},
      {base + " --value-column income --node all --node-column id",
       "paritas: error: --node excludes --node-column\nrun 'paritas --help' for usage\n"},
      {base + " --value-column income --invalid-rows maybe",
       "paritas: error: --invalid-rows 'maybe' is not one of: stop, skip\n"},
      {base + " --value-column income --decimals abc",
       "paritas: error: --decimals must be a whole number from 0 to 17, found 'abc'\n"},
      {base + " --value-column income --decimals 18",
       "paritas: error: --decimals must be a whole number from 0 to 17, found '18'\n"},
      {base + " --value-column income --invalid-rows STOP_",
       "paritas: error: --invalid-rows 'STOP_' is not one of: stop, skip; did you mean 'stop'?\n"},
      {base + " --value-column income --node food",
       "paritas: error: node 'food' is not in " + dir + "/p/parities.csv\n"},
      {base + " --value-column wage",
       "paritas: error: " + dir + "/in.csv:1: missing column 'wage' (found: id, region, income)\n"},
      {base + " --value-column income --interval",
       "paritas: error: no parity intervals: " + dir +
           "/p/sensitivity/bootstrap.csv does not exist; run 'paritas sensitivity CONFIG "
           "--output " +
           dir + "/p' with the configuration and options of the compute run\n"},
      {"deflate --parities " + dir + "/nowhere --input " + dir + "/in.csv --output " + dir +
           "/o.csv --value-column income",
       "paritas: error: " + dir +
           "/nowhere/parities.csv: cannot open file: No such file or directory\n"},
  };
  for (const Case& c : cases) {
    std::string out, err;
    EXPECT_EQ(RunCli(c.arguments, &out, &err), 1) << c.arguments;
    EXPECT_EQ(err, c.message) << c.arguments;
  }
}

// The demo's wage records, both money columns, by the root parities.
TEST(DeflateCommand, StopsAtTheRecordLimitOnDevZero) {
  const std::string dir = MakeCase("cli_deflate_zero", "1,a,12000\n");
  std::string out, err;
  EXPECT_EQ(RunCli("deflate --parities " + dir + "/p --input /dev/zero --output " + dir +
                       "/out.csv --value-column income",
                   &out, &err),
            1);
  EXPECT_EQ(err,
            "paritas: error: /dev/zero:1:1: a field longer than 1 MiB "
            "(limits.max_field_bytes); raise the limit if the file is right\n");
  EXPECT_FALSE(std::filesystem::exists(dir + "/out.csv"));
}

TEST(DeflateCommand, DeflatesTheDemoWages) {
  const std::string dir = MakeTempDir("cli_deflate_demo");
  std::string out, err;
  ASSERT_EQ(
      RunCli("compute " + SourcePath("config/demo.yaml") + " --output " + dir + "/out --no-report",
             &out, &err),
      0)
      << err;
  ASSERT_EQ(RunCli("deflate --parities " + dir + "/out --input " +
                       SourcePath("data/demo/wages.csv") + " --output " + dir +
                       "/wages_real.csv --value-column hourly_wage --value-column annual_earnings",
                   &out, &err),
            0)
      << err;
  const std::string input = ReadTextFile(SourcePath("data/demo/wages.csv"));
  const std::string output = ReadTextFile(dir + "/wages_real.csv");
  EXPECT_EQ(std::count(output.begin(), output.end(), '\n'),
            std::count(input.begin(), input.end(), '\n'));
  EXPECT_EQ(output.substr(0, output.find('\n')),
            "record_id,region,occupation,hourly_wage,annual_earnings,hourly_wage_real,annual_"
            "earnings_real");
  EXPECT_NE(out.find("3,000 written, 0 rejected"), std::string::npos) << out;
  // Parities changed after the run are not that run's: refused, nothing written.
  const std::string parities = ReadTextFile(dir + "/out/parities.csv");
  WriteTextFile(dir + "/out/parities.csv", parities + "\n");
  EXPECT_EQ(
      RunCli("deflate --parities " + dir + "/out --input " + SourcePath("data/demo/wages.csv") +
                 " --output " + dir + "/changed.csv --value-column hourly_wage",
             &out, &err),
      1);
  EXPECT_EQ(
      err.rfind("paritas: error: " + dir + "/out/parities.csv: not the file its run wrote (", 0),
      0u)
      << err;
  EXPECT_FALSE(std::filesystem::exists(dir + "/changed.csv"));
  WriteTextFile(dir + "/out/parities.csv", parities);
  // --interval without a sensitivity run names the command that makes the
  // intervals where deflate looks for them (it once named compute).
  EXPECT_EQ(
      RunCli("deflate --parities " + dir + "/out --input " + SourcePath("data/demo/wages.csv") +
                 " --output " + dir + "/wages_real.csv --value-column hourly_wage --interval",
             &out, &err),
      1);
  EXPECT_EQ(err, "paritas: error: no parity intervals: " + dir +
                     "/out/sensitivity/bootstrap.csv does not exist; run 'paritas sensitivity " +
                     SourcePath("config/demo.yaml") + " --output " + dir +
                     "/out' with the configuration and options of the compute run\n");
}

// The six-commodity data of the CPI Manual 2004 (ch. 19) as a survey of two
// regions with one item per heading: Laspeyres of situation 2 against 1 is
// the published 1.4200 and Fisher 1.4011 (1.401050 exact).
std::string WriteTwoSituationSurvey() {
  const std::string dir = MakeTempDir("cli_pair");
  const double price[2][6] = {{1.0, 1.0, 1.0, 1.0, 1.0, 1.0}, {1.2, 3.0, 1.3, 0.7, 1.4, 0.8}};
  const double quantity[2][6] = {{1.0, 1.0, 2.0, 1.0, 4.5, 0.5}, {0.8, 0.9, 1.9, 1.3, 4.7, 0.6}};
  std::string prices = "region,item,price,heading\n", spending = "region,heading,expenditure\n";
  for (int r = 0; r < 2; ++r) {
    for (int c = 0; c < 6; ++c) {
      const std::string region = "s" + std::to_string(r + 1), heading = "c" + std::to_string(c + 1);
      prices += region + ",i" + heading + "," + std::to_string(price[r][c]) + "," + heading + "\n";
      spending +=
          region + "," + heading + "," + std::to_string(price[r][c] * quantity[r][c]) + "\n";
    }
  }
  WriteTextFile(dir + "/prices.csv", prices);
  WriteTextFile(dir + "/expenditure.csv", spending);
  WriteTextFile(dir + "/run.yaml",
                "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n"
                "classification:\n  all: [c1, c2, c3, c4, c5, c6]\n");
  return dir;
}

TEST(PairCommand, PrintsAndWritesEveryFormula) {
  const std::string dir = WriteTwoSituationSurvey();
  std::string out, err;
  EXPECT_EQ(
      RunCli("pair " + dir + "/run.yaml --from s1 --to s2 --csv " + dir + "/pair.csv", &out, &err),
      0)
      << err;
  EXPECT_NE(out.find("  Laspeyres                       1.420000"), std::string::npos) << out;
  const std::string csv = ReadTextFile(dir + "/pair.csv");
  // Laspeyres 1.42 and Paasche 1.382353, as computed from the data of CPI
  // Manual tables 19.1-19.2; the file holds the doubles as computed (shortest
  // round-trip form), here through cell prices exp(ln p).
  const size_t laspeyres = csv.find("\nlaspeyres,"), paasche = csv.find("\npaasche,");
  ASSERT_NE(laspeyres, std::string::npos) << csv;
  ASSERT_NE(paasche, std::string::npos) << csv;
  EXPECT_NEAR(std::stod(csv.substr(laspeyres + 11)), 1.42, 1e-12);
  EXPECT_NEAR(std::stod(csv.substr(paasche + 9)), 1.382353, 5e-7);
  // With two regions the transitive parity is the bilateral Fisher: no gap.
  const size_t fisher = csv.find("\nfisher,"), transitive = csv.find("\ntransitive,");
  ASSERT_NE(fisher, std::string::npos);
  ASSERT_NE(transitive, std::string::npos);
  EXPECT_NEAR(std::stod(csv.substr(transitive + 12)), std::stod(csv.substr(fisher + 8)), 1e-14);
  const size_t gap = csv.find("\nlog_gap,");
  ASSERT_NE(gap, std::string::npos);
  EXPECT_NEAR(std::stod(csv.substr(gap + 9)), 0.0, 1e-14);
}

// The value of `measure` in a pair CSV; NaN when absent or empty.
double Measure(const std::string& csv, const std::string& measure) {
  const size_t at = csv.find("\n" + measure + ",");
  if (at == std::string::npos) return std::nan("");
  const size_t value = at + measure.size() + 2;
  if (csv[value] == '\n') return std::nan("");
  return std::stod(csv.substr(value));
}

TEST(PairCommand, EveryMethodGivesEachAggregationMethodsTransitiveParity) {
  // Over two regions GEKS-Fisher and the spanning tree (its one edge) are the
  // bilateral Fisher index, GEKS-Törnqvist the Törnqvist index (Caves,
  // Christensen and Diewert 1982: GEKS over two regions is the bilateral
  // index); every other method gives a finite parity, one row each.
  const std::string dir = WriteTwoSituationSurvey();
  std::string out, err;
  ASSERT_EQ(RunCli("pair " + dir + "/run.yaml --from s1 --to s2 --every-method --csv " + dir +
                       "/pair.csv",
                   &out, &err),
            0)
      << err;
  EXPECT_NE(out.find("transitive parity under every aggregation method:"), std::string::npos)
      << out;
  const std::string csv = ReadTextFile(dir + "/pair.csv");
  const double fisher = Measure(csv, "fisher"), tornqvist = Measure(csv, "tornqvist");
  EXPECT_NEAR(fisher, 1.401050, 5e-7);  // CPI Manual 2004, ch. 19: Fisher 1.4011
  EXPECT_NEAR(Measure(csv, "transitive_by_method:geks-fisher"), fisher, 1e-12);
  EXPECT_NEAR(Measure(csv, "transitive_by_method:spanning-tree"), fisher, 1e-12);
  EXPECT_NEAR(Measure(csv, "transitive_by_method:geks-tornqvist"), tornqvist, 1e-12);
  for (const std::string& name : AggregationMethodNames()) {
    EXPECT_EQ(CountOf(csv, "\ntransitive_by_method:" + name + ","), 1u) << name;
    EXPECT_TRUE(std::isfinite(Measure(csv, "transitive_by_method:" + name))) << name;
  }
  // At a basic heading every elementary method is listed instead.
  ASSERT_EQ(RunCli("pair " + dir + "/run.yaml --from s1 --to s2 --node c2 --every-method", &out,
                   &err),
            0)
      << err;
  for (const std::string& name : ElementaryMethodNames()) {
    EXPECT_NE(out.find("  " + name + " "), std::string::npos) << name << "\n" << out;
  }
}

// The run id of the run record in `folder`.
std::string RunIdOf(const std::string& folder) {
  const std::string json = ReadTextFile(folder + "/run.json");
  const size_t at = json.find("\"run_id\": \"");
  if (at == std::string::npos) return "";
  const size_t begin = at + 11;
  return json.substr(begin, json.find('"', begin) - begin);
}

// Computes `config` into `folder` and adds the bootstrap's intervals there.
void ComputeWithIntervals(const std::string& config, const std::string& folder) {
  std::string out, err;
  ASSERT_EQ(RunCli("compute " + config + " --output " + folder + " --no-report", &out, &err), 0)
      << err;
  ASSERT_EQ(RunCli("sensitivity " + config + " --output " + folder + " --parts bootstrap --replicates 40",
                   &out, &err),
            0)
      << err;
}

TEST(PairCommand, PrintsTheRatioIntervalOfTheSameRunAndRefusesAnotherRuns) {
  const std::string dir = WriteTwoSituationSurvey();
  const std::string config = dir + "/run.yaml";
  std::string out, err;
  ComputeWithIntervals(config, dir + "/one");
  const std::string pair = "pair " + config + " --from s1 --to s2 --output ";
  // Same run: the interval is shown, read from pair_ratios.csv (the root),
  // and written to the CSV. Every heading of this survey has one item, which
  // every resample keeps, so the interval is the transitive ratio itself,
  // 1.40105 (> 1: excludes 1).
  ASSERT_EQ(RunCli(pair + dir + "/one --csv " + dir + "/pair.csv", &out, &err), 0) << err;
  const std::string csv = ReadTextFile(dir + "/pair.csv");
  EXPECT_EQ(Measure(csv, "ratio_level"), 0.95);
  EXPECT_NEAR(Measure(csv, "ratio_lower"), Measure(csv, "transitive"), 1e-12);
  EXPECT_NEAR(Measure(csv, "ratio_upper"), Measure(csv, "transitive"), 1e-12);
  EXPECT_EQ(CountOf(csv, "\nratio_excludes_one,yes\n"), 1u) << csv;
  EXPECT_NE(csv.find("\nratio_run_id," + RunIdOf(dir + "/one/sensitivity") + "\n"),
            std::string::npos)
      << csv;
  EXPECT_NE(out.find("  95 % interval of the transitive ratio: "), std::string::npos) << out;
  EXPECT_NE(out.find("  excludes 1: "), std::string::npos) << out;
  EXPECT_NE(out.find("bootstrap replicates of sensitivity run " + RunIdOf(dir + "/one/sensitivity") +
                     ", pair_ratios.csv)"),
            std::string::npos)
      << out;
  EXPECT_EQ(err, "");
  // Other settings than the sensitivity run's: refused, with the difference.
  WriteTextFile(dir + "/tornqvist.yaml", ReadTextFile(config) + "aggregation: geks-tornqvist\n");
  ASSERT_EQ(RunCli("pair " + dir + "/tornqvist.yaml --from s1 --to s2 --output " + dir + "/one",
                   &out, &err),
            0)
      << err;
  const std::string sensitivity_one = dir + "/one/sensitivity";
  const std::string id_one = RunIdOf(sensitivity_one);
  EXPECT_EQ(err, "paritas: warning: the sensitivity results in " + sensitivity_one + " (run " +
                     id_one +
                     ") rest on other inputs or settings than this comparison (\"this run\"): "
                     "aggregation: geks-tornqvist in this run, geks-fisher in the other; its "
                     "intervals are not used; run 'paritas sensitivity' again with this "
                     "configuration\n");
  EXPECT_EQ(out.find("95 % interval of the transitive ratio"), std::string::npos) << out;
  EXPECT_NE(out.find("interval of the transitive ratio: not shown: the sensitivity results in"),
            std::string::npos)
      << out;
  // Same inputs and settings, but the sensitivity folder was made beside
  // another compute run: refused by run id.
  ASSERT_EQ(RunCli("compute " + config + " --output " + dir + "/two --no-report", &out, &err), 0)
      << err;
  std::filesystem::copy(sensitivity_one, dir + "/two/sensitivity");
  ASSERT_EQ(RunCli(pair + dir + "/two", &out, &err), 0) << err;
  EXPECT_EQ(err, "paritas: warning: the sensitivity results in " + dir + "/two/sensitivity (run " +
                     id_one + ") belong to another run than the parities in " + dir +
                     "/two (run " + RunIdOf(dir + "/two") + "): they were made beside run " +
                     RunIdOf(dir + "/one") +
                     "; its intervals are not used; run 'paritas sensitivity' again with this "
                     "configuration\n");
  EXPECT_EQ(out.find("95 % interval of the transitive ratio"), std::string::npos) << out;
}

// A bound of 0 printed the ratio's interval as "0.88 - inf"; bounds are read
// back as sensitivity writes them (positive, within the range of results,
// lower not above upper), and anything else is named and not used.
TEST(PairCommand, RefusesIntervalBoundsSensitivityCannotHaveWritten) {
  const std::string dir = WriteTwoSituationSurvey();
  const std::string config = dir + "/run.yaml";
  std::string out, err;
  ComputeWithIntervals(config, dir + "/one");
  const std::string table = dir + "/one/sensitivity/pair_ratios.csv";
  const std::string written = ReadTextFile(table);
  // Row 2's fields: node, region_a, region_b, ratio, lower, upper, ...
  auto with_bounds = [&](const std::string& lower, const std::string& upper) {
    std::vector<std::string> fields;
    const size_t row = written.find('\n') + 1, end = written.find('\n', row);
    std::stringstream line(written.substr(row, end - row));
    for (std::string field; std::getline(line, field, ',');) fields.push_back(field);
    fields[4] = lower;
    fields[5] = upper;
    std::string joined;
    for (const std::string& field : fields) joined += (joined.empty() ? "" : ",") + field;
    WriteRunFile(dir + "/one/sensitivity", "pair_ratios.csv",
                 written.substr(0, row) + joined + written.substr(end));
  };
  const std::pair<std::pair<std::string, std::string>, std::string> cases[] = {
      {{"0", "1.5"}, table + ":2:5: lower '0' is not positive"},
      {{"1.2", "1e300"},
       table + ":2:6: upper '1e300' is beyond 1e200, where ratios between regions and their "
               "products overflow or lose digits; compute writes none beyond it; is the file as "
               "it wrote it?"},
      {{"", "1.5"},
       table + ":2:5: one bound of the interval is empty (lower '', upper '1.5'); is the file as "
               "sensitivity wrote it?"},
      {{"1.5", "1.2"},
       table + ":2:5: lower '1.5' is above upper '1.2'; is the file as sensitivity wrote it?"},
  };
  for (const auto& [bounds, message] : cases) {
    with_bounds(bounds.first, bounds.second);
    ASSERT_EQ(RunCli("pair " + config + " --from s1 --to s2 --output " + dir + "/one", &out, &err), 0)
        << err;
    EXPECT_EQ(err, "paritas: warning: " + message + "\n");
    EXPECT_NE(out.find("interval of the transitive ratio: not shown: " + message), std::string::npos)
        << out;
  }
  // Bounds the run wrote, but the file changed after it: not read at all.
  with_bounds("1.2", "1.5");
  const std::string recorded = ReadTextFile(table);
  WriteTextFile(table, recorded.substr(0, recorded.size() - 2) + "9\n");
  ASSERT_EQ(RunCli("pair " + config + " --from s1 --to s2 --output " + dir + "/one", &out, &err), 0)
      << err;
  EXPECT_EQ(err.rfind("paritas: warning: " + table + ": not the file its run wrote (", 0), 0u)
      << err;
  EXPECT_NE(out.find("interval of the transitive ratio: not shown: " + table +
                     ": not the file its run wrote ("),
            std::string::npos)
      << out;
}

TEST(PairCommand, RefusesUnknownRegionsAndMissingOptions) {
  const std::string dir = WriteTwoSituationSurvey();
  std::string out, err;
  EXPECT_EQ(RunCli("pair " + dir + "/run.yaml --from s1 --to s3", &out, &err), 1);
  EXPECT_EQ(err, "paritas: error: to region 's3' is not in the survey; did you mean 's1'?\n");
  EXPECT_EQ(RunCli("pair " + dir + "/run.yaml --from s1 --to s2 --node c9", &out, &err), 1);
  EXPECT_EQ(err, "paritas: error: node 'c9' is not in the classification; did you mean 'c1'?\n");
  EXPECT_EQ(RunCli("pair " + dir + "/run.yaml --from s1", &out, &err), 1);
  EXPECT_EQ(err, "paritas: error: --to is required\nrun 'paritas --help' for usage\n");
}

}  // namespace
}  // namespace paritas
