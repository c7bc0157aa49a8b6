// The compute job as a library call: its stage timings and which pair
// tables (matrix/, bilateral/) it writes by default.
#include <chrono>
#include <filesystem>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "paritas/jobs/jobs.h"
#include "paritas/survey/config.h"
#include "test_util.h"

namespace paritas {
namespace {

using testing::MakeTempDir;
using testing::ReadTextFile;
using testing::SourcePath;
using testing::WriteTextFile;

namespace fs = std::filesystem;

RunConfig DemoConfig(const std::string& output) {
  RunConfig config;
  std::string error;
  EXPECT_TRUE(LoadRunConfig(SourcePath("config/demo.yaml"), &config, &error)) << error;
  config.output = output;
  return config;
}

bool HasFile(const ComputeJobSummary& summary, const std::string& path) {
  for (const std::string& output : summary.outputs) {
    if (output == path) return true;
  }
  return false;
}

// The stages run back to back from the start of the job to run.json, so
// their sum is the job's wall time less what follows the record (writing
// run.json itself and swapping the folder into place: well under a
// millisecond here). The bound is loose for a loaded machine.
TEST(ComputeJob, StagesCoverTheJobsWallTime) {
  const std::string dir = MakeTempDir("job_stage_sum");
  const RunConfig config = DemoConfig(dir + "/out");
  ComputeJobSummary summary;
  const auto start = std::chrono::steady_clock::now();
  ASSERT_EQ(RunCompute(config, &summary), kExitOk) << summary.message;
  const double wall =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  const auto record = nlohmann::ordered_json::parse(ReadTextFile(dir + "/out/run.json"));
  std::vector<std::string> names;
  double sum = 0.0;
  for (const auto& [stage, seconds] : record["seconds"].items()) {
    names.push_back(stage);
    EXPECT_GE(seconds.get<double>(), 0.0) << stage;
    sum += seconds.get<double>();
  }
  EXPECT_EQ(names, (std::vector<std::string>{"read", "cells", "elementary", "aggregation",
                                             "outliers", "checks", "contributions", "write"}));
  EXPECT_LE(sum, wall);
  EXPECT_GE(sum, 0.8 * wall) << "stages " << sum << " s of a job of " << wall << " s";
}

// Demo: 16 regions. At the limit the root's tables are written; one region
// beyond it they are left out and the terminal says how to ask for them.
TEST(ComputeJob, PairTablesLeftOutBeyondMatricesUpToRegions) {
  const std::string dir = MakeTempDir("job_pair_tables");
  RunConfig config = DemoConfig(dir + "/at_limit");
  config.matrices_up_to_regions = 16;
  ComputeJobSummary summary;
  ASSERT_EQ(RunCompute(config, &summary), kExitOk) << summary.message;
  EXPECT_TRUE(HasFile(summary, "matrix/all.csv"));
  EXPECT_TRUE(HasFile(summary, "bilateral/all.csv"));
  EXPECT_FALSE(summary.matrices_left_out);
  EXPECT_EQ(summary.FullReport().find("not written"), std::string::npos);

  config = DemoConfig(dir + "/beyond");
  config.matrices_up_to_regions = 15;
  ASSERT_EQ(RunCompute(config, &summary), kExitOk) << summary.message;
  EXPECT_TRUE(summary.matrices_left_out);
  EXPECT_FALSE(HasFile(summary, "matrix/all.csv"));
  EXPECT_FALSE(HasFile(summary, "bilateral/all.csv"));
  EXPECT_FALSE(fs::exists(dir + "/beyond/matrix"));
  EXPECT_FALSE(fs::exists(dir + "/beyond/bilateral"));
  EXPECT_NE(summary.FullReport().find(
                "\nmatrix/ and bilateral/ not written: 16 regions are more than "
                "matrices_up_to_regions (15) and these tables grow as the square of the regions; "
                "ask for them with --matrices NODE (or matrices: in the configuration), or raise "
                "matrices_up_to_regions\n"),
            std::string::npos)
      << summary.FullReport();
  const std::string report = ReadTextFile(dir + "/beyond/report.html");
  EXPECT_EQ(report.find("<code>bilateral/</code>, "), std::string::npos);
  EXPECT_NE(report.find("ask for them with <code>--matrices</code>"), std::string::npos);
  // The root's bilaterals are still computed: the terminal's spread column
  // is filled.
  EXPECT_EQ(summary.root_spreads.size(), 16u);
}

// Asked for by name, the tables are written at any size.
TEST(ComputeJob, PairTablesWrittenWhenAskedForBeyondTheLimit) {
  const std::string dir = MakeTempDir("job_pair_tables_asked");
  RunConfig config = DemoConfig(dir + "/out");
  config.matrices_up_to_regions = 0;
  config.matrices = {"food"};
  ComputeJobSummary summary;
  ASSERT_EQ(RunCompute(config, &summary), kExitOk) << summary.message;
  EXPECT_FALSE(summary.matrices_left_out);
  EXPECT_TRUE(fs::exists(dir + "/out/matrix/food.csv"));
  EXPECT_TRUE(fs::exists(dir + "/out/bilateral/food.csv"));
  EXPECT_FALSE(fs::exists(dir + "/out/matrix/all.csv"));
}

// Check computes as compute does, so it announces the same warnings: with a
// node's tables asked for, that node's Paasche-Laspeyres spreads are checked
// (check used to keep the root's bilaterals only, and missed the food
// spreads below); beyond matrices_up_to_regions the root's spreads come by
// row blocks, with no region x region matrix (on 3,000 regions check's peak
// fell from 1.23 to 0.83 GB).
TEST(CheckJob, WarnsAsComputeDoesWithTheSameTables) {
  const std::string dir = MakeTempDir("job_check_as_compute");
  const auto texts = [](const std::vector<RunWarning>& warnings) {
    std::vector<std::string> out;
    for (const RunWarning& w : warnings) out.push_back(w.kind + " " + w.node + " " + w.region + ": " + w.text);
    return out;
  };
  for (const bool beyond_the_limit : {false, true}) {
    RunConfig config = DemoConfig(dir + (beyond_the_limit ? "/beyond" : "/food"));
    config.checks.max_spread_percent = 0.5;
    if (beyond_the_limit) {
      config.matrices_up_to_regions = 15;
    } else {
      config.matrices = {"food"};
    }
    ComputeJobSummary computed;
    ASSERT_EQ(RunCompute(config, &computed), kExitOk) << computed.message;
    CheckSummary checked;
    ASSERT_EQ(RunCheck(config, &checked), kExitOk) << checked.message;
    ASSERT_TRUE(checked.compute_warnings_known);
    EXPECT_EQ(texts(checked.compute_warnings), texts(computed.warnings)) << beyond_the_limit;
    size_t food_spreads = 0;
    for (const RunWarning& w : computed.warnings) food_spreads += w.node == "food" && w.text.find("Paasche-Laspeyres spread") != std::string::npos;
    EXPECT_EQ(food_spreads > 0, !beyond_the_limit) << beyond_the_limit;
  }
}

TEST(ComputeJob, MatricesUpToRegionsMustBeAWholeNumber) {
  const std::string dir = MakeTempDir("job_limit_key");
  // The demo's configuration, its relative paths made absolute.
  std::string demo = ReadTextFile(SourcePath("config/demo.yaml"));
  ASSERT_FALSE(demo.empty());
  for (size_t at; (at = demo.find("../data/")) != std::string::npos;) {
    demo.replace(at, 8, SourcePath("data/"));
  }
  RunConfig config;
  std::string error;
  WriteTextFile(dir + "/ok.yaml", demo + "\nmatrices_up_to_regions: 40\n");
  ASSERT_TRUE(LoadRunConfig(dir + "/ok.yaml", &config, &error)) << error;
  EXPECT_EQ(config.matrices_up_to_regions, 40);
  WriteTextFile(dir + "/bad.yaml", demo + "\nmatrices_up_to_regions: 2.5\n");
  EXPECT_FALSE(LoadRunConfig(dir + "/bad.yaml", &config, &error));
  EXPECT_NE(error.find("matrices_up_to_regions must be a whole number from 0 to 1000000000, "
                       "found '2.5'"),
            std::string::npos)
      << error;
}

TEST(ComputeJob, MatricesUpToRegionsDefaultsTo500) {
  EXPECT_EQ(RunConfig().matrices_up_to_regions, 500);
}

}  // namespace
}  // namespace paritas
