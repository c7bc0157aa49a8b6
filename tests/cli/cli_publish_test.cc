// End-to-end runs of `paritas publish` through the real executable: the demo
// published as CSV, and the exact messages of bad arguments.
#include <gtest/gtest.h>

#include <filesystem>
#include <string>

#include "test_util.h"

namespace paritas {
namespace {

using testing::CountOf;
using testing::MakeTempDir;
using testing::ReadTextFile;
using testing::RunCli;
using testing::SourcePath;
using testing::WriteTextFile;

// The demo computed into `run_dir` (no report).
void ComputeDemo(const std::string& run_dir) {
  std::string out, err;
  ASSERT_EQ(
      RunCli("compute " + SourcePath("config/demo.yaml") + " --output " + run_dir + " --no-report",
             &out, &err),
      0)
      << err;
}

TEST(PublishCommand, PublishesTheDemoRunAsCsvTables) {
  const std::string dir = MakeTempDir("cli_publish_demo");
  ComputeDemo(dir + "/run");
  std::string out, err;
  ASSERT_EQ(RunCli("publish " + dir + "/run --csv " + dir + "/levels.csv --depth 1 --sort LEVEL",
                   &out, &err),
            0)
      << err;
  EXPECT_EQ(err, "");
  // The demo: 16 regions; depth 1 keeps the root and its 9 children, then
  // the two analytic groups of config/demo.yaml.
  EXPECT_NE(out.find("published 16 regions x 12 nodes of run "), std::string::npos) << out;
  EXPECT_NE(out.find("wrote " + dir + "/levels.csv\nwrote " + dir + "/levels_real_per_head.csv\n"),
            std::string::npos)
      << out;
  const std::string levels = ReadTextFile(dir + "/levels.csv");
  EXPECT_EQ(levels.substr(0, levels.find('\n')),
            "region,name,all,food,clothing,housing,utilities,health,transport,communication,"
            "recreation,restaurants_hotels,all_but_housing,energy");
  EXPECT_EQ(CountOf(levels, "\n"), 17u);
}

// A publication carries its run's provenance (run id, input digests), so
// it must hold that run's figures: a parities.csv changed after the run is
// refused, and nothing is written; the same folder restored publishes.
TEST(PublishCommand, RefusesParitiesChangedAfterTheRun) {
  const std::string dir = MakeTempDir("cli_publish_changed");
  ComputeDemo(dir + "/run");
  std::string out, err;
  const std::string parities = ReadTextFile(dir + "/run/parities.csv");
  const size_t at = parities.find("\nall,aggregate,har,");
  ASSERT_NE(at, std::string::npos);
  std::string edited = parities;
  edited.insert(at + 19, "1");  // a leading digit added to har's parity
  WriteTextFile(dir + "/run/parities.csv", edited);
  EXPECT_EQ(RunCli("publish " + dir + "/run --csv " + dir + "/levels.csv", &out, &err), 1);
  EXPECT_EQ(err.rfind("paritas: error: " + dir + "/run/parities.csv: not the file its run wrote (" +
                          dir + "/run/run.json records SHA-256 ",
                      0),
            0u)
      << err;
  EXPECT_FALSE(std::filesystem::exists(dir + "/levels.csv"));
  WriteTextFile(dir + "/run/parities.csv", parities);
  EXPECT_EQ(RunCli("publish " + dir + "/run --csv " + dir + "/levels.csv", &out, &err), 0) << err;
}

TEST(PublishCommand, RefusesBadArgumentsWithExitCodeOne) {
  const std::string dir = MakeTempDir("cli_publish_arguments");
  const std::string base = "publish " + dir + "/run --csv " + dir + "/t.csv";
  struct Case {
    std::string arguments;
    std::string message;
  };
  const Case cases[] = {
      {"publish --csv t.csv",
       "paritas: error: run_folder is required\nrun 'paritas --help' for usage\n"},
      {"publish " + dir + "/run",
       "paritas: error: nothing to write: give --csv FILE, --xlsx FILE or both\n"},
      {base + " --decimals 7",
       "paritas: error: --decimals must be a whole number from 0 to 6, found '7'\n"},
      {base + " --decimals 1.5",
       "paritas: error: --decimals must be a whole number from 0 to 6, found '1.5'\n"},
      {base + " --depth -1",
       "paritas: error: --depth must be a whole number from 0 to 1000, found '-1'\n"},
      {base + " --sort size", "paritas: error: --sort 'size' is not one of: code, level\n"},
      {base + " --xlsx " + dir + "/t.ods",
       "paritas: error: --xlsx '" + dir +
           "/t.ods': a workbook's name must end in .xlsx, found "
           "'.ods'\n"},
      {base, "paritas: error: " + dir +
                 "/run/run.json: cannot open file: No such file or "
                 "directory\n"},
  };
  for (const Case& c : cases) {
    std::string out, err;
    EXPECT_EQ(RunCli(c.arguments, &out, &err), 1) << c.arguments;
    EXPECT_EQ(err, c.message) << c.arguments;
    EXPECT_FALSE(std::filesystem::exists(dir + "/t.csv")) << c.arguments;
  }
}

}  // namespace
}  // namespace paritas
