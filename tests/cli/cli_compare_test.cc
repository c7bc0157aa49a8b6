// End-to-end runs of `paritas compare` through the real executable: two
// computes of the demo with different aggregation methods compared, and
// bad arguments with their exit codes and exact messages.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <map>
#include <string>

#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "test_util.h"

namespace paritas {
namespace {

using testing::CountOf;
using testing::MakeTempDir;
using testing::ReadTextFile;
using testing::RunCli;
using testing::SourcePath;

// Computes the demo twice (geks-fisher, then geks-tornqvist) under `dir`.
void ComputeTwice(const std::string& dir) {
  std::string out, err;
  ASSERT_EQ(
      RunCli("compute " + SourcePath("config/demo.yaml") + " --output " + dir + "/old", &out, &err),
      0)
      << err;
  ASSERT_EQ(RunCli("compute " + SourcePath("config/demo.yaml") + " --no-report --output " + dir +
                       "/new --aggregation geks-tornqvist",
                   &out, &err),
            0)
      << err;
}

TEST(CompareCommand, ComparesTwoDemoRunsAndWritesTheFolder) {
  const std::string dir = MakeTempDir("cli_compare_demo");
  ComputeTwice(dir);
  std::string out, err;
  ASSERT_EQ(RunCli("compare " + dir + "/old " + dir + "/new --output " + dir + "/cmp --top 3", &out,
                   &err),
            0)
      << err;
  EXPECT_EQ(err, "");
  EXPECT_NE(
      out.find("  - aggregation: geks-tornqvist in the new run, geks-fisher in the old run\n"),
      std::string::npos)
      << out;
  EXPECT_NE(out.find("largest moves at 'all' (3 of 16 regions in both runs):"), std::string::npos)
      << out;
  EXPECT_NE(out.find("wrote " + dir + "/cmp: changes.csv, drivers.csv, comparison.html, run.json"),
            std::string::npos);
  // Every region's drivers at every aggregate sum to its log change.
  std::map<std::pair<std::string, std::string>, double> sums, changes;
  const std::string drivers = ReadTextFile(dir + "/cmp/drivers.csv");
  CsvReader reader(drivers);
  CsvRecord record;
  ASSERT_TRUE(reader.Next(&record));
  while (reader.Next(&record)) {
    double v = 0;
    ASSERT_EQ(ParseNumber(record.fields[11], &v), NumberStatus::kOk);
    sums[{std::string(record.fields[0]), std::string(record.fields[1])}] += v;
  }
  const std::string changes_csv = ReadTextFile(dir + "/cmp/changes.csv");
  CsvReader change_reader(changes_csv);
  ASSERT_TRUE(change_reader.Next(&record));
  while (change_reader.Next(&record)) {
    double v = 0;
    if (record.fields[1] == "heading") continue;  // aggregates and analytic groups
    ASSERT_EQ(ParseNumber(record.fields[7], &v), NumberStatus::kOk);
    changes[{std::string(record.fields[0]), std::string(record.fields[2])}] = v;
  }
  ASSERT_EQ(sums.size(), changes.size());
  for (const auto& [key, change] : changes) EXPECT_NEAR(sums.at(key), change, 1e-12);
  EXPECT_EQ(CountOf(ReadTextFile(dir + "/cmp/comparison.html"), "id=\"change-chart\""), 1u);
  // The compute report explains the dearest region.
  EXPECT_EQ(CountOf(ReadTextFile(dir + "/old/report.html"), "id=\"why-dear-chart\""), 1u);
}

TEST(CompareCommand, UsesTheStandardErrorsOfRealSensitivityRuns) {
  // Each folder gets a bootstrap from a sensitivity run with its own
  // settings, so the run records match and the test against them is made.
  const std::string dir = MakeTempDir("cli_compare_sensitivity");
  ComputeTwice(dir);
  std::string out, err;
  const std::string config = SourcePath("config/demo.yaml");
  ASSERT_EQ(RunCli("sensitivity " + config + " --output " + dir +
                       "/old --replicates 20 --parts bootstrap",
                   &out, &err),
            0)
      << err;
  ASSERT_EQ(RunCli("sensitivity " + config + " --output " + dir +
                       "/new --replicates 20 --parts bootstrap --aggregation geks-tornqvist",
                   &out, &err),
            0)
      << err;
  ASSERT_EQ(RunCli("compare " + dir + "/old " + dir + "/new --output " + dir + "/cmp", &out, &err),
            0)
      << err;
  EXPECT_NE(out.find("  region       old       new  change %      rank  beyond"), std::string::npos)
      << out;
  const std::string changes = ReadTextFile(dir + "/cmp/changes.csv");
  CsvReader reader(changes);
  CsvRecord record;
  ASSERT_TRUE(reader.Next(&record));
  int tested = 0;
  while (reader.Next(&record)) {
    if (record.fields[0] != "all") continue;
    double se_old = 0, se_new = 0, threshold = 0;
    ASSERT_EQ(ParseNumber(record.fields[11], &se_old), NumberStatus::kOk);
    ASSERT_EQ(ParseNumber(record.fields[12], &se_new), NumberStatus::kOk);
    ASSERT_EQ(ParseNumber(record.fields[13], &threshold), NumberStatus::kOk);
    EXPECT_NEAR(threshold, 1.96 * std::sqrt(se_old * se_old + se_new * se_new), 1e-15);
    EXPECT_TRUE(record.fields[14] == "yes" || record.fields[14] == "no");
    ++tested;
  }
  EXPECT_EQ(tested, 16);
}

// The drivers are read from each run's contributions.csv: one changed
// after its run is refused, and no comparison folder is written.
TEST(CompareCommand, RefusesATableChangedAfterItsRun) {
  const std::string dir = MakeTempDir("cli_compare_changed");
  ComputeTwice(dir);
  const std::string table = dir + "/new/contributions.csv";
  testing::WriteTextFile(table, ReadTextFile(table) + "\n");
  std::string out, err;
  EXPECT_EQ(RunCli("compare " + dir + "/old " + dir + "/new --output " + dir + "/cmp", &out, &err),
            1);
  EXPECT_EQ(err.rfind("paritas: error: " + table + ": not the file its run wrote (" + dir +
                          "/new/run.json records SHA-256 ",
                      0),
            0u)
      << err;
  EXPECT_FALSE(std::filesystem::exists(dir + "/cmp"));
}

TEST(CompareCommand, RefusesAMissingFolderAndBadOptions) {
  const std::string dir = MakeTempDir("cli_compare_bad");
  std::string out, err;
  EXPECT_EQ(RunCli("compare " + dir + "/a " + dir + "/b", &out, &err), 1);
  EXPECT_EQ(err, "paritas: error: old run '" + dir +
                     "/a': no such folder (expected an output folder of 'paritas compute')\n");
  EXPECT_EQ(RunCli("compare " + dir + " " + dir + " --top 0", &out, &err), 1);
  EXPECT_EQ(err, "paritas: error: --top must be a whole number from 1 to 1000, found '0'\n");
  EXPECT_EQ(RunCli("compare " + dir + " " + dir + " --z -1", &out, &err), 1);
  EXPECT_EQ(err, "paritas: error: --z must be a number above 0, found '-1'\n");
}

TEST(CompareCommand, AnUnknownReportRegionIsRefusedByCompute) {
  const std::string dir = MakeTempDir("cli_compare_report_region");
  const std::string demo = SourcePath("data/demo/");
  testing::WriteTextFile(
      dir + "/run.yaml",
      "survey:\n  prices: " + demo + "prices.csv\n  items: " + demo +
          "items.csv\n  expenditure: " + demo + "expenditure.csv\n  regions: " + demo +
          "regions.csv\nclassification: " + demo + "classification.yaml\nreport_region: harr\n");
  std::string out, err;
  EXPECT_EQ(RunCli("compute " + dir + "/run.yaml --output " + dir + "/out", &out, &err), 1);
  EXPECT_EQ(err,
            "paritas: error: report_region 'harr' is not in the survey; did you mean 'har'?\n");
}

}  // namespace
}  // namespace paritas
