// Comparing two runs on hand-built output folders whose changes and drivers
// are known exactly: the trick is to make each aggregate the own-share
// geometric mean of its headings, exp(sum_h s_h l_h), so the price and
// weight parts are exact by hand and the method part is zero; one region
// moves with unchanged headings, so its whole move is method part.
#include "paritas/use/run_comparison.h"

#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <map>
#include <string>

#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "paritas/jobs/compare_job.h"
#include "test_util.h"

namespace paritas {
namespace {

using ::paritas::testing::CountOf;
using ::paritas::testing::MakeTempDir;
using ::paritas::testing::ReadTextFile;
using ::paritas::testing::WriteTextFile;

std::string RunJson(const std::string& command, const std::string& id, const std::string& reference,
                    const std::string& aggregation = "geks-fisher") {
  return "{\"schema_version\": 2, \"tool\": {\"name\": \"paritas\", \"version\": \"0.1.0\"}, "
         "\"run_id\": \"" +
         id + "\", \"command\": \"" + command + "\", \"configuration\": {\"reference\": \"" +
         reference + "\", \"elementary\": \"cpd\", \"aggregation\": \"" + aggregation +
         "\"}, \"inputs\": []}\n";
}

// A heading row of contributions.csv; compare reads share and heading_parity.
std::string Contribution(const std::string& region, const std::string& heading, double share,
                         double heading_parity) {
  std::string out = "all," + region + "," + heading + ",";
  AppendShortest(share, &out);
  out += ",,";
  AppendShortest(heading_parity, &out);
  return out + ",,,\n";
}

constexpr const char* kContributionsHeader =
    "node,region,heading,share,weight,heading_parity,price_part,adjustment,log_contribution\n";
constexpr const char* kParitiesHeader = "node,kind,region,parity,rank\n";

std::string Number(double v) {
  std::string out;
  AppendShortest(v, &out);
  return out;
}

// Old run: a (h1 100, h2 100, shares .5/.5) = 100; b (144, 100, .5/.5) =
// 120; c (100, 100) = 100. New run: a's h1 rises to 121 (a = 110); b's
// shares move to .75/.25 (b = 100 x 1.44^.75); c moves to 105 with its
// headings unchanged.
void WriteHandPair(const std::string& dir, const std::string& old_reference = "mean",
                   const std::string& new_reference = "mean") {
  const double b_new = 100.0 * std::pow(1.44, 0.75);
  WriteTextFile(dir + "/old/run.json", RunJson("compute", "old-id", old_reference));
  WriteTextFile(dir + "/old/parities.csv",
                std::string(kParitiesHeader) +
                    "all,aggregate,a,100,2\nall,aggregate,b,120,1\nall,aggregate,c,100,3\n"
                    "h1,heading,a,100,2\nh1,heading,b,144,1\nh1,heading,c,100,3\n"
                    "h2,heading,a,100,1\nh2,heading,b,100,2\nh2,heading,c,100,3\n");
  WriteTextFile(dir + "/old/contributions.csv",
                std::string(kContributionsHeader) + Contribution("a", "h1", 0.5, 100) +
                    Contribution("a", "h2", 0.5, 100) + Contribution("b", "h1", 0.5, 144) +
                    Contribution("b", "h2", 0.5, 100) + Contribution("c", "h1", 0.5, 100) +
                    Contribution("c", "h2", 0.5, 100));
  WriteTextFile(dir + "/new/run.json", RunJson("compute", "new-id", new_reference));
  WriteTextFile(dir + "/new/parities.csv",
                std::string(kParitiesHeader) + "all,aggregate,a,110,2\nall,aggregate,b," +
                    Number(b_new) +
                    ",1\nall,aggregate,c,105,3\n"
                    "h1,heading,a,121,2\nh1,heading,b,144,1\nh1,heading,c,100,3\n"
                    "h2,heading,a,100,1\nh2,heading,b,100,2\nh2,heading,c,100,3\n");
  WriteTextFile(dir + "/new/contributions.csv",
                std::string(kContributionsHeader) + Contribution("a", "h1", 0.5, 121) +
                    Contribution("a", "h2", 0.5, 100) + Contribution("b", "h1", 0.75, 144) +
                    Contribution("b", "h2", 0.25, 100) + Contribution("c", "h1", 0.5, 100) +
                    Contribution("c", "h2", 0.5, 100));
}

CompareOptions Options(const std::string& dir) {
  CompareOptions options;
  options.old_dir = dir + "/old";
  options.new_dir = dir + "/new";
  return options;
}

const RegionDrivers& DriversOf(const RunComparison& c, const std::string& region) {
  for (const RegionDrivers& d : c.drivers) {
    if (d.node == "all" && d.region == region) return d;
  }
  ADD_FAILURE() << "no drivers for " << region;
  static const RegionDrivers none;
  return none;
}

const HeadingDriver& Heading(const RegionDrivers& d, const std::string& heading) {
  for (const HeadingDriver& h : d.headings) {
    if (h.heading == heading) return h;
  }
  ADD_FAILURE() << "no heading " << heading;
  static const HeadingDriver none;
  return none;
}

const ParityChange& ChangeOf(const RunComparison& c, const std::string& node,
                             const std::string& region) {
  for (const ParityChange& p : c.changes) {
    if (p.node == node && p.region == region) return p;
  }
  ADD_FAILURE() << "no change for " << node << ", " << region;
  static const ParityChange none;
  return none;
}

TEST(CompareRuns, ChangesAndDriversOfAHandBuiltPairAreExact) {
  const std::string dir = MakeTempDir("compare_hand");
  WriteHandPair(dir);
  RunComparison c;
  CompareSummary summary;
  ASSERT_TRUE(CompareRuns(Options(dir), &c, &summary)) << summary.message;
  EXPECT_EQ(summary.num_changes, 9);
  const ParityChange& a = ChangeOf(c, "all", "a");
  EXPECT_NEAR(a.percent_change, 10.0, 1e-12);
  EXPECT_NEAR(a.log_change, std::log(1.1), 1e-15);
  // a: h1's price moved by ln 1.21 at share .5: price part 0.5 ln 1.21 = ln 1.1.
  const RegionDrivers& da = DriversOf(c, "a");
  EXPECT_NEAR(Heading(da, "h1").price_part, std::log(1.1), 1e-15);
  EXPECT_NEAR(Heading(da, "h1").weight_part, 0.0, 1e-15);
  EXPECT_NEAR(Heading(da, "h1").method_part, 0.0, 1e-15);
  EXPECT_NEAR(Heading(da, "h2").log_change, 0.0, 1e-15);
  // b: shares .5/.5 -> .75/.25, l = (ln 1.44, 0), L = (.5, .75) ln 1.44:
  // weight h1 = .25 (ln 1.44 - .625 ln 1.44) = .09375 ln 1.44; h2 = -.25 (0 -
  // .625 ln 1.44) = .15625 ln 1.44; together .25 ln 1.44 = the change.
  const RegionDrivers& db = DriversOf(c, "b");
  const double l = std::log(1.44);
  EXPECT_NEAR(db.log_change, 0.25 * l, 1e-15);
  EXPECT_NEAR(Heading(db, "h1").weight_part, 0.09375 * l, 1e-15);
  EXPECT_NEAR(Heading(db, "h2").weight_part, 0.15625 * l, 1e-15);
  EXPECT_NEAR(Heading(db, "h1").price_part, 0.0, 1e-15);
  EXPECT_NEAR(Heading(db, "h1").method_part, 0.0, 1e-15);
  // c: nothing moved below it, so its ln 1.05 is all method part, split by
  // the mean shares (.5, .5).
  const RegionDrivers& dc = DriversOf(c, "c");
  EXPECT_NEAR(Heading(dc, "h1").method_part, 0.5 * std::log(1.05), 1e-15);
  EXPECT_NEAR(Heading(dc, "h2").method_part, 0.5 * std::log(1.05), 1e-15);
  for (const RegionDrivers& d : c.drivers) {
    double sum = 0.0;
    for (const HeadingDriver& h : d.headings) {
      EXPECT_NEAR(h.price_part + h.weight_part + h.method_part, h.log_change, 1e-15);
      sum += h.log_change;
    }
    EXPECT_NEAR(sum, d.log_change, 1e-12) << d.region;
  }
  // Sorted by size: a's h1 first.
  EXPECT_EQ(da.headings.front().heading, "h1");
}

TEST(CompareRuns, ChangesCsvStatesRanksAndLeavesUncertaintyEmptyWithoutIt) {
  const std::string dir = MakeTempDir("compare_csv");
  WriteHandPair(dir);
  RunComparison c;
  CompareSummary summary;
  ASSERT_TRUE(CompareRuns(Options(dir), &c, &summary)) << summary.message;
  const std::string csv = ChangesCsv(c);
  EXPECT_EQ(csv.substr(0, csv.find('\n')),
            "node,kind,region,presence,parity_old,parity_new,percent_change,log_change,rank_old,"
            "rank_new,rank_change,log_se_old,log_se_new,threshold,beyond_uncertainty");
  EXPECT_NE(csv.find("\nall,aggregate,a,both,100,110," + Number(100.0 * (1.1 - 1.0)) + "," +
                     Number(std::log(110.0 / 100.0)) + ",2,2,0,,,,\n"),
            std::string::npos)
      << csv;
  EXPECT_NE(csv.find("\nh2,heading,a,both,100,100,0,0,1,1,0,,,,\n"), std::string::npos) << csv;
  EXPECT_FALSE(c.has_uncertainty);
  EXPECT_EQ(c.statements.back(),
            "no test against the runs' uncertainty: it needs sensitivity/bootstrap.csv from "
            "'paritas sensitivity' in both folders");
}

TEST(CompareRuns, ARegionAddedAndOneRemovedAreListedNeverDropped) {
  const std::string dir = MakeTempDir("compare_added_removed");
  WriteHandPair(dir);
  // Old run also has d; new run also has e and a new heading h3 that a buys.
  WriteTextFile(dir + "/old/parities.csv",
                ReadTextFile(dir + "/old/parities.csv") + "all,aggregate,d,90,4\n");
  WriteTextFile(dir + "/new/parities.csv", ReadTextFile(dir + "/new/parities.csv") +
                                               "all,aggregate,e,95,4\nh3,heading,a,80,1\n");
  WriteTextFile(dir + "/new/contributions.csv",
                std::string(kContributionsHeader) + Contribution("a", "h1", 0.4, 121) +
                    Contribution("a", "h2", 0.4, 100) + Contribution("a", "h3", 0.2, 80) +
                    Contribution("b", "h1", 0.75, 144) + Contribution("b", "h2", 0.25, 100) +
                    Contribution("c", "h1", 0.5, 100) + Contribution("c", "h2", 0.5, 100));
  RunComparison c;
  CompareSummary summary;
  ASSERT_TRUE(CompareRuns(Options(dir), &c, &summary)) << summary.message;
  EXPECT_EQ(c.regions_old_only, std::vector<std::string>{"d"});
  EXPECT_EQ(c.regions_new_only, std::vector<std::string>{"e"});
  EXPECT_EQ(c.nodes_new_only, std::vector<std::string>{"h3"});
  EXPECT_EQ(c.headings_new_only, std::vector<std::string>{"h3"});
  EXPECT_EQ(ChangeOf(c, "all", "d").presence, Presence::kOldOnly);
  EXPECT_EQ(ChangeOf(c, "all", "e").presence, Presence::kNewOnly);
  EXPECT_TRUE(std::isnan(ChangeOf(c, "all", "e").log_change));
  EXPECT_EQ(ChangeOf(c, "h3", "a").presence, Presence::kNewOnly);
  // h3 entered a's basket: no old price, so its price part is 0 and its
  // entry is weight part, 0.2 (ln 0.8 - ½ (0 + ln 1.1)).
  const HeadingDriver& h3 = Heading(DriversOf(c, "a"), "h3");
  EXPECT_EQ(h3.presence, Presence::kNewOnly);
  EXPECT_EQ(h3.price_part, 0.0);
  EXPECT_NEAR(h3.weight_part, 0.2 * (std::log(0.8) - 0.5 * std::log(1.1)), 1e-15);
  double sum = 0.0;
  for (const HeadingDriver& h : DriversOf(c, "a").headings) sum += h.log_change;
  EXPECT_NEAR(sum, std::log(1.1), 1e-12);
  EXPECT_NE(std::find(c.statements.begin(), c.statements.end(),
                      "reference mean with regions in one run only: the mean the parities are "
                      "relative to moved with the regions, so every parity shifts with it"),
            c.statements.end());
  const std::string text = CompareTable(c, 10);
  EXPECT_NE(text.find("  regions in the old run only (1): d\n"), std::string::npos) << text;
  EXPECT_NE(text.find("  regions in the new run only (1): e\n"), std::string::npos) << text;
  EXPECT_NE(text.find("  headings in the new run only (1): h3\n"), std::string::npos) << text;
}

TEST(CompareRuns, TestsEachChangeAgainstBothRunsStandardErrors) {
  const std::string dir = MakeTempDir("compare_uncertainty");
  WriteHandPair(dir);
  for (const char* run : {"old", "new"}) {
    const std::string id = std::string(run) + "-id";
    WriteTextFile(dir + "/" + run + "/sensitivity/run.json", RunJson("sensitivity", id, "mean"));
    WriteTextFile(dir + "/" + run + "/sensitivity/bootstrap.csv",
                  std::string("node,region,log_se\nall,a,") + (run[0] == 'o' ? "0.02" : "0.03") +
                      "\nall,b,0.5\nall,c,0.02\n");
  }
  RunComparison c;
  CompareSummary summary;
  ASSERT_TRUE(CompareRuns(Options(dir), &c, &summary)) << summary.message;
  ASSERT_TRUE(c.has_uncertainty);
  const ParityChange& a = ChangeOf(c, "all", "a");
  // ln 1.1 = 0.0953 > 1.96 sqrt(0.02² + 0.03²) = 0.0707 (computed here).
  EXPECT_NEAR(a.threshold, 1.96 * std::sqrt(0.02 * 0.02 + 0.03 * 0.03), 1e-15);
  EXPECT_EQ(a.beyond_uncertainty, 1);
  // ln 1.05 = 0.0488 < 1.96 sqrt(2) 0.02 = 0.0554.
  EXPECT_EQ(ChangeOf(c, "all", "c").beyond_uncertainty, 0);
  EXPECT_EQ(ChangeOf(c, "h1", "a").beyond_uncertainty, -1);
  EXPECT_EQ(summary.num_beyond_uncertainty, 1);
}

TEST(CompareRuns, StandardErrorsOfAnotherRunAreNotUsed) {
  const std::string dir = MakeTempDir("compare_other_se");
  WriteHandPair(dir);
  for (const char* run : {"old", "new"}) {
    WriteTextFile(dir + "/" + run + "/sensitivity/run.json",
                  RunJson("sensitivity", "s", "mean", "geary-khamis"));
    WriteTextFile(dir + "/" + run + "/sensitivity/bootstrap.csv",
                  "node,region,log_se\nall,a,0.1\n");
  }
  RunComparison c;
  CompareSummary summary;
  ASSERT_TRUE(CompareRuns(Options(dir), &c, &summary)) << summary.message;
  EXPECT_FALSE(c.has_uncertainty);
  EXPECT_EQ(c.statements[0], "the standard errors in " + dir +
                                 "/old/sensitivity/bootstrap.csv are not used: the sensitivity "
                                 "run rests on other inputs or settings than the old parities "
                                 "(aggregation: geks-fisher in this run, geary-khamis in the "
                                 "other)");
}

TEST(CompareRuns, DifferentMethodsAreComparedWithAStatement) {
  const std::string dir = MakeTempDir("compare_methods");
  WriteHandPair(dir);
  WriteTextFile(dir + "/new/run.json", RunJson("compute", "new-id", "mean", "geks-tornqvist"));
  RunComparison c;
  CompareSummary summary;
  ASSERT_TRUE(CompareRuns(Options(dir), &c, &summary)) << summary.message;
  ASSERT_GE(c.statements.size(), 2u);
  EXPECT_EQ(c.statements[0],
            "aggregation: geks-tornqvist in the new run, geks-fisher in the old run");
  EXPECT_EQ(c.statements[1],
            "the runs were computed with different settings: part of each change comes from the "
            "settings, not from prices or weights");
}

TEST(CompareRuns, DifferentReferencesAreRebasedToARegionOfBoth) {
  const std::string dir = MakeTempDir("compare_rebased");
  WriteHandPair(dir, "a", "mean");
  RunComparison c;
  CompareSummary summary;
  ASSERT_TRUE(CompareRuns(Options(dir), &c, &summary)) << summary.message;
  EXPECT_EQ(c.rebased_to, "a");
  // New b against new a: 100 x 1.44^.75 / 110 x 100.
  EXPECT_NEAR(ChangeOf(c, "all", "b").parity_new, 100.0 * std::pow(1.44, 0.75) / 1.1, 1e-12);
  EXPECT_NEAR(ChangeOf(c, "all", "a").parity_new, 100.0, 1e-12);
  EXPECT_TRUE(c.drivers.empty());
  EXPECT_EQ(c.statements[0],
            "the runs have different references (a in the old run, mean in the new): both are "
            "re-expressed against region 'a' (each parity divided by that region's parity at the "
            "same node); standard errors and drivers are left out, since they belong to each "
            "run's own reference");
}

TEST(CompareRuns, DifferentMeansAreRefused) {
  const std::string dir = MakeTempDir("compare_refused");
  WriteHandPair(dir, "mean", "weighted-mean");
  RunComparison c;
  CompareSummary summary;
  EXPECT_FALSE(CompareRuns(Options(dir), &c, &summary));
  EXPECT_EQ(summary.message,
            "the runs have different references (mean in " + dir + "/old, weighted-mean in " + dir +
                "/new) and neither is a region with a parity in both runs, so their "
                "parities have no common scale; compute one run again with the other's reference");
}

// Each bad folder, and the exact message.
TEST(CompareRuns, RefusesBadFoldersWithExactMessages) {
  const std::string dir = MakeTempDir("compare_bad");
  WriteHandPair(dir);
  RunComparison c;
  CompareSummary summary;
  CompareOptions options = Options(dir);
  options.old_dir = dir + "/nowhere";
  EXPECT_FALSE(CompareRuns(options, &c, &summary));
  EXPECT_EQ(summary.message, "old run '" + dir +
                                 "/nowhere': no such folder (expected an output folder of "
                                 "'paritas compute')");
  std::filesystem::create_directories(dir + "/empty");
  options.old_dir = dir + "/empty";
  EXPECT_FALSE(CompareRuns(options, &c, &summary));
  EXPECT_EQ(summary.message, "old run '" + dir +
                                 "/empty' is not an output folder of 'paritas compute': " + dir +
                                 "/empty/run.json: cannot open file: No such file or directory");
  WriteTextFile(dir + "/sens/run.json", RunJson("sensitivity", "x", "mean"));
  options.old_dir = dir + "/sens";
  EXPECT_FALSE(CompareRuns(options, &c, &summary));
  EXPECT_EQ(
      summary.message,
      "old run '" + dir + "/sens': run.json records the command 'sensitivity', not 'compute'");
  options = Options(dir);
  WriteTextFile(dir + "/new/parities.csv",
                std::string(kParitiesHeader) + "all,aggregate,a,110,1\nall,aggregate,b,abc,2\n");
  EXPECT_FALSE(CompareRuns(options, &c, &summary));
  EXPECT_EQ(summary.message, dir + "/new/parities.csv:3:4: parity 'abc' is not a number");
  WriteTextFile(dir + "/new/parities.csv",
                std::string(kParitiesHeader) + "all,aggregate,a,110,1\nall,aggregate,a,100,2\n");
  EXPECT_FALSE(CompareRuns(options, &c, &summary));
  EXPECT_EQ(summary.message, dir +
                                 "/new/parities.csv:3:1: duplicate row for node 'all' and region "
                                 "'a' (first at line 2)");
  WriteTextFile(dir + "/new/parities.csv", "node,region,parity\nall,a,110\n");
  EXPECT_FALSE(CompareRuns(options, &c, &summary));
  EXPECT_EQ(summary.message, dir +
                                 "/new/parities.csv:1: missing column 'kind' (found: node, "
                                 "region, parity)");
  WriteTextFile(dir + "/new/parities.csv", std::string(kParitiesHeader) + "all,aggregate,a,-3,1\n");
  EXPECT_FALSE(CompareRuns(options, &c, &summary));
  EXPECT_EQ(summary.message, dir + "/new/parities.csv:2:4: parity '-3' is not positive");
}

TEST(RunCompare, WritesTheFolderWholeAndNeverOverAnInput) {
  const std::string dir = MakeTempDir("compare_job");
  WriteHandPair(dir);
  CompareOptions options = Options(dir);
  options.output_dir = dir + "/cmp";
  RunComparison c;
  CompareSummary summary;
  std::string text;
  ASSERT_EQ(RunCompare(options, &c, &summary, &text), 0) << summary.message;
  EXPECT_EQ(summary.files_written, (std::vector<std::string>{"changes.csv", "drivers.csv",
                                                             "comparison.html", "run.json"}));
  EXPECT_EQ(ReadTextFile(dir + "/cmp/changes.csv"), ChangesCsv(c));
  EXPECT_EQ(ReadTextFile(dir + "/cmp/drivers.csv"), DriversCsv(c));
  const std::string html = ReadTextFile(dir + "/cmp/comparison.html");
  EXPECT_EQ(CountOf(html, "id=\"change-chart\""), 1u);
  EXPECT_EQ(CountOf(html, "class=\"chart driver-chart\""), 3u);
  EXPECT_NE(ReadTextFile(dir + "/cmp/run.json").find("\"command\": \"compare\""),
            std::string::npos);
  EXPECT_NE(text.find("largest moves at 'all' (3 of 3 regions in both runs):"), std::string::npos)
      << text;
  // The output may not be an input folder.
  options.output_dir = dir + "/old";
  EXPECT_EQ(RunCompare(options, &c, &summary, &text), 1);
  EXPECT_EQ(summary.message, "--output '" + dir + "/old' holds the input parities.csv '" + dir +
                                 "/old/parities.csv'; the output folder is replaced whole, so it "
                                 "must not hold inputs: choose another folder");
  EXPECT_TRUE(std::filesystem::exists(dir + "/old/contributions.csv"));
}

}  // namespace
}  // namespace paritas
