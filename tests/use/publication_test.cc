// Publication tables from a small hand-written run folder: rounding, order,
// depth, intervals, and the exact messages of what is refused. The workbook
// itself is read back by openpyxl in tests/python/publication_openpyxl_check.py.
#include "paritas/use/publication.h"

#include <gtest/gtest.h>

#include <filesystem>
#include <string>

#include "base/sha256.h"
#include "test_util.h"

namespace paritas {
namespace {

using testing::MakeTempDir;
using testing::ReadTextFile;
using testing::WriteTextFile;

constexpr char kRegions[] =
    "region,name,population\nnor,Northmark,100\nsou,\"Southdale, Lower\",300\nwes,Westfold,200\n";

std::string Digest(const std::string& text) {
  internal::Sha256 hasher;
  hasher.Update(text.data(), text.size());
  return hasher.HexDigest();
}

std::string RunJson(const std::string& dir, const std::string& command,
                    const std::string& reference, const std::string& extra) {
  return "{\"schema_version\": 2, \"tool\": {\"name\": \"paritas\", \"version\": \"0.1.0\"},"
         " \"run_id\": \"" +
         command + "-run\", \"command\": \"" + command +
         "\","
         " \"configuration\": {\"config_path\": \"" +
         dir + "/run.yaml\", \"reference\": \"" + reference +
         "\", \"elementary\": \"cpd\", \"aggregation\": \"geks-fisher\"},"
         " \"inputs\": [{\"role\": \"regions\", \"path\": \"" +
         dir +
         "/regions.csv\","
         " \"sha256\": \"" +
         Digest(kRegions) + "\"}]" + extra + "}";
}

// A run of three regions over all -> {food -> {bread, meat}, rent}. The
// levels are chosen for rounding: 99.95 is stored as 99.95000000000000284
// (computed here with Python's decimal.Decimal(99.95)), so it rounds up to
// 100.0; 98.25 is exact, a tie, and rounds to even (98.2), as printf does.
std::string MakeRun(const std::string& name) {
  const std::string dir = MakeTempDir(name);
  WriteTextFile(dir + "/regions.csv", kRegions);
  WriteTextFile(dir + "/run.yaml",
                "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n"
                "  regions: regions.csv\n"
                "classification:\n  all: [{food: [bread, meat]}, rent]\n");
  WriteTextFile(dir + "/run/run.json", RunJson(dir, "compute", "mean", ""));
  WriteTextFile(
      dir + "/run/parities.csv",
      "node,kind,region,parity,real_per_capita_index\n"
      "all,aggregate,nor,97.04,110.04\nall,aggregate,sou,104.26,95.55\n"
      "all,aggregate,wes,99.95,101.449\n"
      "food,aggregate,nor,98.25,1\nfood,aggregate,sou,101.45,2\nfood,aggregate,wes,100,3\n"
      "bread,heading,nor,90,\nbread,heading,sou,111.111,\nbread,heading,wes,,\n"
      "meat,heading,nor,100,\nmeat,heading,sou,100,\nmeat,heading,wes,100,\n"
      "rent,heading,nor,80,\nrent,heading,sou,120,\nrent,heading,wes,104.9999,\n");
  return dir;
}

PublishOptions OptionsFor(const std::string& dir) {
  PublishOptions options;
  options.run_dir = dir + "/run";
  options.csv_path = dir + "/levels.csv";
  return options;
}

TEST(PublishOptions, DefaultsAreValidOnceRunAndOutputAreGiven) {
  PublishOptions options;
  options.run_dir = "out/demo";
  options.xlsx_path = "tables.XLSX";
  std::string error;
  EXPECT_TRUE(options.IsValid(&error)) << error;
  EXPECT_EQ(options.decimals, 1);
  EXPECT_EQ(options.order, PublicationOrder::kCode);
}

TEST(PublishOptions, RefusesBadSettingsWithExactMessages) {
  PublishOptions base;
  base.run_dir = "out/demo";
  base.csv_path = "t.csv";
  std::string error;
  PublishOptions o = base;
  o.csv_path = "";
  EXPECT_FALSE(o.IsValid(&error));
  EXPECT_EQ(error, "nothing to write: give --csv FILE, --xlsx FILE or both");
  o = base;
  o.decimals = 7;
  EXPECT_FALSE(o.IsValid(&error));
  EXPECT_EQ(error, "decimals must be from 0 to 6, found 7");
  o = base;
  o.max_depth = -2;
  EXPECT_FALSE(o.IsValid(&error));
  EXPECT_EQ(error, "max_depth must be -1 (every node) or more, found -2");
  o = base;
  o.xlsx_path = "t.xls";
  EXPECT_FALSE(o.IsValid(&error));
  EXPECT_EQ(error, "--xlsx 't.xls': a workbook's name must end in .xlsx, found '.xls'");
  o = base;
  o.run_dir = "";
  EXPECT_FALSE(o.IsValid(&error));
  EXPECT_EQ(error, "the run folder is required (the output folder of 'paritas compute')");
}

TEST(PublicationOrder, ReadsNamesIgnoringCase) {
  PublicationOrder order = PublicationOrder::kCode;
  EXPECT_TRUE(FromString("LeVeL", &order));
  EXPECT_EQ(order, PublicationOrder::kLevel);
  EXPECT_EQ(ToString(order), "level");
  EXPECT_FALSE(FromString("size", &order));
  EXPECT_EQ(PublicationOrderNames(), (std::vector<std::string>{"code", "level"}));
}

TEST(Publication, RealPerHeadTableSitsBesideTheCsv) {
  EXPECT_EQ(RealPerHeadCsvPath("t/levels.CSV"), "t/levels_real_per_head.csv");
  EXPECT_EQ(RealPerHeadCsvPath("levels"), "levels_real_per_head.csv");
}

TEST(Publication, RoundsThroughTheDecimalTextAndLeavesMissingCellsEmpty) {
  const std::string dir = MakeRun("publish_rounding");
  PublishSummary summary;
  ASSERT_TRUE(Publish(OptionsFor(dir), &summary)) << summary.message;
  // Names from regions.csv (quoted when they hold a comma); wes has no bread parity.
  EXPECT_EQ(ReadTextFile(dir + "/levels.csv"),
            "region,name,all,food,bread,meat,rent\n"
            "nor,Northmark,97.0,98.2,90.0,100.0,80.0\n"
            "sou,\"Southdale, Lower\",104.3,101.5,111.1,100.0,120.0\n"
            "wes,Westfold,100.0,100.0,,100.0,105.0\n");
  EXPECT_EQ(ReadTextFile(dir + "/levels_real_per_head.csv"),
            "region,name,all,food,bread,meat,rent\n"
            "nor,Northmark,110.0,1.0,,,\n"
            "sou,\"Southdale, Lower\",95.5,2.0,,,\n"
            "wes,Westfold,101.4,3.0,,,\n");
  EXPECT_EQ(summary.files_written,
            (std::vector<std::string>{dir + "/levels.csv", dir + "/levels_real_per_head.csv"}));
  EXPECT_EQ(summary.BriefReport(), "published 3 regions x 5 nodes of run compute-run: 2 tables");
  // The stored number is the rounded one, so the CSV and the workbook agree.
  EXPECT_EQ(summary.tables[0].values[2][0], 100.0);
}

TEST(Publication, SortsByRootLevelDearestFirstAndCutsAtDepth) {
  const std::string dir = MakeRun("publish_level");
  PublishOptions options = OptionsFor(dir);
  options.order = PublicationOrder::kLevel;
  options.max_depth = 1;
  options.decimals = 0;
  PublishSummary summary;
  ASSERT_TRUE(Publish(options, &summary)) << summary.message;
  // Roots 104.26 > 99.95 > 97.04; depth 1 keeps all, food and rent.
  EXPECT_EQ(ReadTextFile(dir + "/levels.csv"),
            "region,name,all,food,rent\n"
            "sou,\"Southdale, Lower\",104,101,120\n"
            "wes,Westfold,100,100,105\n"
            "nor,Northmark,97,98,80\n");
  EXPECT_EQ(summary.num_nodes_given, 5);
  EXPECT_EQ(summary.num_nodes_used, 3);
}

TEST(Publication, AddsIntervalColumnsFromAMatchingSensitivityRun) {
  const std::string dir = MakeRun("publish_intervals");
  WriteTextFile(
      dir + "/run/sensitivity/run.json",
      RunJson(dir, "sensitivity", "mean",
              ", \"sensitivity\": {\"settings\": {\"level\": 0.9, \"replicates\": 200}}"));
  WriteTextFile(
      dir + "/run/sensitivity/bootstrap.csv",
      "node,region,lower,upper\nall,nor,95.04,99.06\nall,sou,101,107.5\nrent,wes,100,110\n"
      "all,elsewhere,1,2\n");
  PublishOptions options = OptionsFor(dir);
  options.max_depth = 0;
  PublishSummary summary;
  ASSERT_TRUE(Publish(options, &summary)) << summary.message;
  EXPECT_EQ(ReadTextFile(dir + "/levels.csv"),
            "region,name,all,all lower,all upper\n"
            "nor,Northmark,97.0,95.0,99.1\n"
            "sou,\"Southdale, Lower\",104.3,101.0,107.5\n"
            "wes,Westfold,100.0,,\n");
  EXPECT_EQ(summary.notes.interval,
            "90 % bootstrap interval over item resamples (200 replicates), sensitivity run "
            "sensitivity-run");
  // A run that records its interval's kind has it named in the note.
  WriteTextFile(dir + "/run/sensitivity/run.json",
                RunJson(dir, "sensitivity", "mean",
                        ", \"sensitivity\": {\"settings\": {\"level\": 0.9, \"replicates\": "
                        "200, \"interval\": \"expanded\"}}"));
  ASSERT_TRUE(Publish(options, &summary)) << summary.message;
  EXPECT_EQ(summary.notes.interval,
            "90 % expanded percentile bootstrap interval over item resamples (200 replicates), "
            "sensitivity run sensitivity-run");
  // The level as recorded: 99.9 % was shown as "100 %".
  WriteTextFile(dir + "/run/sensitivity/run.json",
                RunJson(dir, "sensitivity", "mean",
                        ", \"sensitivity\": {\"settings\": {\"level\": 0.999, \"replicates\": "
                        "200, \"interval\": \"expanded\"}}"));
  ASSERT_TRUE(Publish(options, &summary)) << summary.message;
  EXPECT_EQ(summary.notes.interval.rfind("99.9 % expanded percentile bootstrap interval", 0), 0u)
      << summary.notes.interval;
  // An interval with one bound is not sensitivity's: refused, located.
  const std::string bootstrap = dir + "/run/sensitivity/bootstrap.csv";
  const std::string bounds = ReadTextFile(bootstrap);
  WriteTextFile(bootstrap, "node,region,lower,upper\nall,nor,95.04,\n");
  EXPECT_FALSE(Publish(options, &summary));
  EXPECT_EQ(summary.message, bootstrap + ":2:3: one bound of the interval is empty (lower '95.04', "
                                         "upper ''); is the file as sensitivity wrote it?");
  WriteTextFile(bootstrap, bounds);
  // Without intervals the same run publishes the levels alone.
  options.intervals = false;
  ASSERT_TRUE(Publish(options, &summary)) << summary.message;
  EXPECT_EQ(summary.tables[0].columns, (std::vector<std::string>{"all"}));
}

TEST(Publication, RefusesIntervalsOfARunOnOtherSettings) {
  const std::string dir = MakeRun("publish_other_intervals");
  WriteTextFile(dir + "/run/sensitivity/run.json", RunJson(dir, "sensitivity", "nor", ""));
  WriteTextFile(dir + "/run/sensitivity/bootstrap.csv", "node,region,lower,upper\n");
  PublishSummary summary;
  EXPECT_FALSE(Publish(OptionsFor(dir), &summary));
  EXPECT_EQ(
      summary.message,
      "the intervals in " + dir +
          "/run/sensitivity come from a sensitivity run on other "
          "inputs or settings than the parities in " +
          dir +
          "/run (\"this run\" = the "
          "parities): reference: mean in this run, nor in the other; run 'paritas sensitivity " +
          dir + "/run.yaml --output " + dir +
          "/run' with the configuration and options of "
          "the compute run; or publish without intervals (--no-intervals)");
  EXPECT_FALSE(std::filesystem::exists(dir + "/levels.csv"));
}

TEST(Publication, RefusesARegionsFileChangedSinceTheRun) {
  const std::string dir = MakeRun("publish_changed_regions");
  WriteTextFile(dir + "/regions.csv", "region,name\nnor,Elsewhere\n");
  PublishSummary summary;
  EXPECT_FALSE(Publish(OptionsFor(dir), &summary));
  const std::string then = Digest(kRegions), now = Digest("region,name\nnor,Elsewhere\n");
  EXPECT_EQ(summary.message, dir +
                                 "/regions.csv: the regions file is not the one the run read "
                                 "(SHA-256 " +
                                 then.substr(0, 12) + "... in run.json, " + now.substr(0, 12) +
                                 "... now); rerun compute or give the "
                                 "configuration of this run with --config");
}

TEST(Publication, RefusesANodeOutsideTheClassification) {
  const std::string dir = MakeRun("publish_other_tree");
  WriteTextFile(dir + "/run.yaml",
                "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n"
                "  regions: regions.csv\nclassification:\n  all: [{food: [bread, meat]}]\n");
  PublishSummary summary;
  EXPECT_FALSE(Publish(OptionsFor(dir), &summary));
  EXPECT_EQ(summary.message, "node 'rent' of parities.csv is not in the classification of " + dir +
                                 "/run.yaml; give the configuration of this run with --config");
}

// The index of real expenditure per head was read at any sign and size and
// published as it stood; it is read as compute writes it.
TEST(Publication, RefusesARealPerHeadIndexComputeCannotHaveWritten) {
  const std::string dir = MakeRun("publish_bad_index");
  const std::string path = dir + "/run/parities.csv";
  const std::string written = ReadTextFile(path);
  const std::pair<std::string, std::string> cases[] = {
      {"-3", "real_per_capita_index '-3' is negative"},
      {"1e250",
       "real_per_capita_index '1e250' is beyond 1e200, where ratios between regions and their "
       "products overflow or lose digits; compute writes none beyond it; is the file as it wrote it?"},
  };
  for (const auto& [figure, problem] : cases) {
    std::string text = written;
    text.replace(text.find(",110.04\n"), 8, "," + figure + "\n");
    WriteTextFile(path, text);
    PublishSummary summary;
    EXPECT_FALSE(Publish(OptionsFor(dir), &summary)) << figure;
    EXPECT_EQ(summary.message, path + ":2:5: " + problem);
  }
}

TEST(Publication, RefusesOutputsInsideTheRunFolderOrOverAnInput) {
  const std::string dir = MakeRun("publish_paths");
  PublishOptions options = OptionsFor(dir);
  options.xlsx_path = dir + "/run/tables.xlsx";
  PublishSummary summary;
  EXPECT_FALSE(Publish(options, &summary));
  EXPECT_EQ(summary.message, "--xlsx '" + dir + "/run/tables.xlsx' lies inside the run folder " +
                                 dir +
                                 "/run, which compute replaces whole; write the tables "
                                 "elsewhere");
  options = OptionsFor(dir);
  options.csv_path = dir + "/regions.csv";
  EXPECT_FALSE(Publish(options, &summary));
  EXPECT_EQ(ReadTextFile(dir + "/regions.csv"), kRegions);
  EXPECT_EQ(summary.message, "--csv '" + dir + "/regions.csv' is the regions file '" + dir +
                                 "/regions.csv': an input is never overwritten; choose another "
                                 "file");
}

TEST(Publication, RefusesAMissingConfigurationAndPointsToConfigOption) {
  const std::string dir = MakeRun("publish_no_config");
  std::filesystem::rename(dir + "/run.yaml", dir + "/moved.yaml");
  PublishSummary summary;
  EXPECT_FALSE(Publish(OptionsFor(dir), &summary));
  EXPECT_EQ(summary.message, "the run's configuration: " + dir +
                                 "/run.yaml: cannot open file: No such file or directory; give "
                                 "the configuration of this run with --config");
  PublishOptions options = OptionsFor(dir);
  options.config_path = dir + "/moved.yaml";
  EXPECT_TRUE(Publish(options, &summary)) << summary.message;
}

TEST(Publication, RefusesAFolderOfAnotherCommand) {
  const std::string dir = MakeRun("publish_not_compute");
  WriteTextFile(dir + "/run/run.json", RunJson(dir, "sensitivity", "mean", ""));
  PublishSummary summary;
  EXPECT_FALSE(Publish(OptionsFor(dir), &summary));
  EXPECT_EQ(summary.message, dir +
                                 "/run/run.json: a record of 'sensitivity', not of compute; "
                                 "give the output folder of 'paritas compute'");
}

TEST(Publication, WritesAWorkbookAsAZipArchive) {
  const std::string dir = MakeRun("publish_workbook");
  PublishOptions options = OptionsFor(dir);
  options.csv_path = "";
  options.xlsx_path = dir + "/tables.xlsx";
  PublishSummary summary;
  ASSERT_TRUE(Publish(options, &summary)) << summary.message;
  // An .xlsx file is a zip archive: local file headers start "PK\3\4".
  EXPECT_EQ(ReadTextFile(options.xlsx_path).substr(0, 4), std::string("PK\3\4"));
  EXPECT_EQ(summary.files_written, (std::vector<std::string>{options.xlsx_path}));
  // No temporary file is left beside it.
  int num_files = 0;
  for (const auto& entry : std::filesystem::directory_iterator(dir)) {
    num_files += entry.path().filename().string().rfind("tables.xlsx", 0) == 0;
  }
  EXPECT_EQ(num_files, 1);
}

}  // namespace
}  // namespace paritas
