// End-to-end runs of `paritas compute` through the real executable.
#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <iostream>
#include <map>
#include <nlohmann/json.hpp>
#include <regex>
#include <set>

#include <fcntl.h>
#include <sys/resource.h>
#include <sys/wait.h>
#include <unistd.h>

#include "base/dense_kernels.h"
#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "sanitizers.h"
#include "synthetic_survey.h"
#include "test_util.h"

namespace paritas {
namespace {

using testing::MakeTempDir;
using testing::ReadTextFile;
using testing::RunCli;
using testing::SourcePath;
using testing::WriteTextFile;

namespace fs = std::filesystem;

std::vector<std::vector<std::string>> ReadRows(const std::string& text) {
  std::vector<std::vector<std::string>> rows;
  CsvReader reader(text);
  CsvRecord record;
  while (reader.Next(&record)) rows.emplace_back(record.fields.begin(), record.fields.end());
  EXPECT_TRUE(reader.error().empty()) << reader.error();
  return rows;
}

std::string Demo() { return SourcePath("config/demo.yaml"); }

// Runs compute on the demo survey once per test binary.
const std::string& DemoOutput() {
  static const std::string folder = [] {
    const std::string dir = MakeTempDir("cli_demo");
    std::string out, err;
    EXPECT_EQ(RunCli("compute " + Demo() + " --output " + dir + " --matrices all", &out, &err), 0) << err;
    return dir;
  }();
  return folder;
}

TEST(ComputeCommand, WritesEveryDocumentedOutputOfTheDemo) {
  const std::string& dir = DemoOutput();
  for (const char* file : {"parities.csv", "matrix/all.csv", "bilateral/all.csv", "matrix/food.csv",
                           "bilateral/bread_cereals.csv", "outliers.csv", "dispersion.csv", "report.html",
                           "run.json"}) {
    EXPECT_TRUE(fs::exists(dir + "/" + file)) << file;
  }
  const auto rows = ReadRows(ReadTextFile(dir + "/parities.csv"));
  ASSERT_GT(rows.size(), 1u);
  const std::vector<std::string> first(rows[0].begin(), rows[0].begin() + 7);
  EXPECT_EQ(first, (std::vector<std::string>{"node", "kind", "region", "parity", "expenditure",
                                             "real_expenditure", "real_per_capita_index"}));
  // 16 regions x (29 headings + 11 aggregates + 2 groups).
  EXPECT_EQ(rows.size(), 1u + 16u * 42u);
}

// The demo shows what the warnings are for: its two planted recording errors
// and the island group surveyed without rents (data/demo/README.md).
TEST(ComputeCommand, DemoWarningsNameThePlantedErrorsAndThePartialBasket) {
  const std::string text = ReadTextFile(DemoOutput() + "/warnings.csv");
  const auto rows = ReadRows(text);
  auto has = [&](const std::string& kind, const std::string& node, const std::string& region) {
    return std::any_of(rows.begin(), rows.end(), [&](const std::vector<std::string>& row) {
      return row[0] == kind && row[1] == node && row[2] == region;
    });
  };
  EXPECT_TRUE(has("gross-outlier", "dairy_eggs", "net")) << text;
  EXPECT_TRUE(has("gross-outlier", "dairy_eggs", "vel")) << text;
  EXPECT_TRUE(has("partial-basket", "all", "zel")) << text;
  EXPECT_TRUE(has("partial-basket", "housing", "zel")) << text;
  // The report marks the region on its price level table.
  const std::string html = ReadTextFile(DemoOutput() + "/report.html");
  EXPECT_NE(html.find("<td>zel <a class=\"warn\" href=\"#warnings\" title=\"warnings: partial "
                      "basket\">&#9888;</a></td>"),
            std::string::npos);
}

TEST(ComputeCommand, MatricesAgreeWithTheParityTable) {
  const std::string& dir = DemoOutput();
  std::map<std::string, double> root;
  for (const auto& row : ReadRows(ReadTextFile(dir + "/parities.csv"))) {
    if (row[0] == "all") root[row[2]] = std::stod(row[3]);
  }
  const auto matrix = ReadRows(ReadTextFile(dir + "/matrix/all.csv"));
  ASSERT_EQ(matrix.size(), 17u);
  for (size_t a = 1; a < matrix.size(); ++a) {
    for (size_t b = 1; b < matrix[0].size(); ++b) {
      const double expected = 100.0 * root[matrix[0][b]] / root[matrix[a][0]];
      EXPECT_NEAR(std::stod(matrix[a][b]), expected, 1e-5 * expected) << matrix[a][0] << " " << matrix[0][b];
    }
  }
}

TEST(ComputeCommand, BilateralTableHasEveryOrderedPairAndReversalHolds) {
  const auto rows = ReadRows(ReadTextFile(DemoOutput() + "/bilateral/all.csv"));
  ASSERT_EQ(rows[0], (std::vector<std::string>{"from", "to", "laspeyres", "paasche", "fisher", "tornqvist",
                                               "spread", "num_headings"}));
  EXPECT_EQ(rows.size(), 1u + 16u * 15u);
  std::map<std::pair<std::string, std::string>, std::vector<double>> pairs;
  for (size_t k = 1; k < rows.size(); ++k) {
    pairs[{rows[k][0], rows[k][1]}] = {std::stod(rows[k][2]), std::stod(rows[k][3]), std::stod(rows[k][4]),
                                       std::stod(rows[k][5])};
  }
  for (const auto& [key, value] : pairs) {
    const auto& back = pairs.at({key.second, key.first});
    // CPI Manual (2004) ch. 15-16: F(a,b) F(b,a) = 1, P(a,b) = 1 / L(b,a).
    EXPECT_NEAR(value[2] * back[2], 1.0, 1e-5);
    EXPECT_NEAR(value[1] * back[0], 1.0, 1e-5);
  }
}

// The tree file reproduces the root's parities: chaining its Fisher links
// from any region gives the parity ratios of parities.csv (Hill 1999: the
// parities are the Fisher indices multiplied along the tree).
TEST(ComputeCommand, SpanningTreeWritesATreeThatChainsToTheParities) {
  const std::string dir = MakeTempDir("cli_tree");
  std::string out, err;
  ASSERT_EQ(
      RunCli("compute " + Demo() + " --aggregation spanning-tree --output " + dir, &out, &err), 0)
      << err;
  std::map<std::string, double> root;
  for (const auto& row : ReadRows(ReadTextFile(dir + "/parities.csv"))) {
    if (row[0] == "all") root[row[2]] = std::stod(row[3]);
  }
  const auto rows = ReadRows(ReadTextFile(dir + "/tree/all.csv"));
  ASSERT_EQ(rows[0], (std::vector<std::string>{"from", "to", "spread_percent", "fisher"}));
  ASSERT_EQ(rows.size(), 1u + 15u);  // 16 regions, 15 edges
  std::set<std::string> joined = {rows[1][0]};
  for (size_t k = 1; k < rows.size(); ++k) {
    EXPECT_TRUE(joined.count(rows[k][0])) << "edge " << k << " starts outside the tree";
    EXPECT_TRUE(joined.insert(rows[k][1]).second) << rows[k][1] << " joined twice";
    EXPECT_GE(std::stod(rows[k][2]), 0.0);
    const double ratio = root[rows[k][1]] / root[rows[k][0]];
    EXPECT_NEAR(std::stod(rows[k][3]), ratio, 1e-9 * ratio);
  }
  EXPECT_TRUE(fs::exists(dir + "/tree/food.csv"));
  const std::string html = ReadTextFile(dir + "/report.html");
  EXPECT_NE(html.find("<svg class=\"chart\" id=\"spanning-tree\""), std::string::npos);
  EXPECT_NE(html.find("<table class=\"data sortable\" id=\"tree-table\">"), std::string::npos);
  // Other methods write no tree.
  EXPECT_FALSE(fs::exists(DemoOutput() + "/tree"));
}

// Spreads were in log units on the terminal and x100 in the report; both
// now show "P-L spread, %" = 100 |ln(Laspeyres / Paasche)| with 2 decimals.
TEST(ComputeCommand, PrintsEachRegionsLargestSpreadInPercent) {
  const std::string dir = MakeTempDir("cli_spread_unit");
  std::string out, err;
  ASSERT_EQ(RunCli("compute " + Demo() + " --no-report --output " + dir, &out, &err), 0) << err;
  std::map<std::string, std::pair<double, std::string>> largest;  // region -> spread, partner
  for (const auto& row : ReadRows(ReadTextFile(dir + "/bilateral/all.csv"))) {
    if (row[0] == "from") continue;
    auto& entry = largest[row[0]];
    if (entry.second.empty() || std::stod(row[6]) > entry.first)
      entry = {std::stod(row[6]), row[1]};
  }
  const size_t head = out.find("\nregion ");
  ASSERT_NE(head, std::string::npos) << out;
  const std::string header = out.substr(head + 1, out.find('\n', head + 1) - head - 1);
  EXPECT_TRUE(std::regex_search(header, std::regex("  P-L spread, %  worst pair$"))) << header;
  std::smatch m;
  // Code, name (regions.csv), rank, parity, real/head, spread, partner.
  const std::regex row("\n(\\w+) .*? +\\d+ +[\\d.]+ +[\\d.]+ +([\\d.]+)  (\\w+)(?=\n)");
  int checked = 0;
  for (auto it = std::sregex_iterator(out.begin(), out.end(), row); it != std::sregex_iterator();
       ++it, ++checked) {
    const auto& [spread, partner] = largest.at((*it)[1]);
    EXPECT_EQ((*it)[2].str(), FormatFixed(100.0 * spread, 2)) << (*it)[0];
    EXPECT_EQ((*it)[3].str(), partner) << (*it)[0];
  }
  EXPECT_EQ(checked, 16) << out;
  EXPECT_NE(out.find("(P-L spread, %: 100 x |ln(Laspeyres / Paasche)|, the largest of the region "
                     "against any other, with that partner;"),
            std::string::npos)
      << out;
}

TEST(ComputeCommand, RunRecordReconcilesRowsAndNamesEveryInput) {
  const nlohmann::json record = nlohmann::json::parse(ReadTextFile(DemoOutput() + "/run.json"));
  EXPECT_EQ(record["schema_version"], 2);
  EXPECT_EQ(record["run_id"].get<std::string>().size(), 32u);
  EXPECT_EQ(record["command"], "compute");
  EXPECT_EQ(record["outcome"], "ok");
  // regions, items, the two price files, expenditure and the external rent parities.
  ASSERT_EQ(record["inputs"].size(), 6u);
  for (const auto& input : record["inputs"]) {
    EXPECT_EQ(input["rows_read"].get<int64_t>(),
              input["rows_used"].get<int64_t>() + input["rows_rejected"].get<int64_t>());
    EXPECT_EQ(input["sha256"].get<std::string>().size(), 64u);
  }
  for (const char* stage : {"read", "cells", "elementary", "aggregation", "contributions", "write"}) {
    EXPECT_TRUE(record["seconds"].contains(stage)) << stage;
  }
  // The read limits in force are part of the run's settings.
  const nlohmann::json& limits = record["configuration"]["limits"];
  EXPECT_EQ(limits["max_file_bytes"].get<int64_t>(), int64_t{256} << 20);
  EXPECT_EQ(limits["max_record_bytes"].get<int64_t>(), int64_t{16} << 20);
  EXPECT_EQ(limits["max_yaml_depth"].get<int>(), 64);
}

TEST(ComputeCommand, ASecondRunIsByteIdenticalExceptForTimings) {
  const std::string again = MakeTempDir("cli_demo_again");
  std::string out, err;
  ASSERT_EQ(RunCli("compute " + Demo() + " --output " + again + " --matrices all --threads 1", &out, &err), 0)
      << err;
  int compared = 0;
  for (const auto& entry : fs::recursive_directory_iterator(again)) {
    if (!entry.is_regular_file()) continue;
    const std::string relative = fs::relative(entry.path(), again).string();
    std::string first = ReadTextFile(DemoOutput() + "/" + relative);
    std::string second = ReadTextFile(entry.path().string());
    if (relative == "run.json") {
      // Seconds, the output folder, the thread count and the run id legitimately differ.
      const std::regex varying(
          "\"(read|cells|elementary|aggregation|outliers|checks|contributions|write|output|threads|"
          "run_id)\": [^,\\n]*");
      first = std::regex_replace(first, varying, "");
      second = std::regex_replace(second, varying, "");
    }
    EXPECT_EQ(first, second) << relative;
    ++compared;
  }
  EXPECT_GE(compared, 9);
}

// The demo run with kPortableKernelsVariable set to `value` (and
// --matrices all, as DemoOutput's run): returns the kernels its run.json
// records, after checking that every other file has DemoOutput()'s bytes.
std::string DemoKernelsWhenForced(const std::string& value, const std::string& folder_name) {
  const std::string forced = MakeTempDir(folder_name);
  std::string out, err;
  ::setenv(internal::kPortableKernelsVariable, value.c_str(), 1);
  const int code = RunCli("compute " + Demo() + " --output " + forced + " --matrices all", &out, &err);
  ::unsetenv(internal::kPortableKernelsVariable);
  EXPECT_EQ(code, 0) << err;
  int compared = 0;
  for (const auto& entry : fs::recursive_directory_iterator(forced)) {
    const std::string relative = fs::relative(entry.path(), forced).string();
    if (!entry.is_regular_file() || relative == "run.json") continue;
    EXPECT_EQ(ReadTextFile(DemoOutput() + "/" + relative), ReadTextFile(entry.path().string())) << relative;
    ++compared;
  }
  EXPECT_GE(compared, 9);
  return nlohmann::json::parse(ReadTextFile(forced + "/run.json"))["tool"]["dense_kernels"].get<std::string>();
}

// The vector and portable kernels give the same bits, so with the portable
// ones forced every file but run.json keeps its bytes (outliers.csv, the
// parities and their standard errors and the all-pairs matrices included).
// Without AVX2 + FMA both runs are portable and equal.
TEST(ComputeCommand, RecordsTheDenseKernelsAndTheirVariableForcesThePortableOnes) {
  EXPECT_EQ(DemoKernelsWhenForced("1", "cli_demo_portable"), "portable");
  // The demo run inherits this process's environment, which may force the
  // portable kernels itself.
  EXPECT_EQ(nlohmann::json::parse(ReadTextFile(DemoOutput() + "/run.json"))["tool"]["dense_kernels"],
            internal::ToString(internal::ActiveDenseKernels()));
}

// On a CPU with AVX-512 the variable's "avx2-fma" makes the run take the
// AVX2 + FMA kernels, with every file but run.json the same bytes; on one
// without AVX2 + FMA it is ignored (the CPU's own choice).
TEST(ComputeCommand, AvxTwoKernelsForcedGiveTheSameBytesAsTheAvx512Ones) {
  const std::string expected = internal::CpuHasAvx2Fma()
                                   ? "avx2-fma"
                                   : internal::ToString(internal::ActiveDenseKernels());
  EXPECT_EQ(DemoKernelsWhenForced("avx2-fma", "cli_demo_avx2"), expected);
}

// A CPU without FMA runs Eigen's unfused products (the exact emulation of
// fma is about 100 times slower): the variable's "unfused" forces them here.
// Every text field is the same and every number agrees to about 1e-10 of
// its size (their sums are rounded differently, not formed differently).
TEST(ComputeCommand, UnfusedKernelsGiveTheSameRowsToTheLastDigits) {
  const std::string unfused = MakeTempDir("cli_demo_unfused");
  std::string out, err;
  ::setenv(internal::kPortableKernelsVariable, "unfused", 1);
  const int code = RunCli("compute " + Demo() + " --output " + unfused, &out, &err);
  ::unsetenv(internal::kPortableKernelsVariable);
  ASSERT_EQ(code, 0) << err;
  EXPECT_EQ(nlohmann::json::parse(ReadTextFile(unfused + "/run.json"))["tool"]["dense_kernels"], "unfused");
  int64_t numbers = 0, differ = 0;
  for (const std::string name : {"parities.csv", "contributions.csv", "outliers.csv", "dispersion.csv"}) {
    const auto fused_rows = ReadRows(ReadTextFile(DemoOutput() + "/" + name));
    const auto unfused_rows = ReadRows(ReadTextFile(unfused + "/" + name));
    ASSERT_EQ(fused_rows.size(), unfused_rows.size()) << name;
    for (size_t r = 0; r < fused_rows.size(); ++r) {
      ASSERT_EQ(fused_rows[r].size(), unfused_rows[r].size()) << name << " row " << r;
      for (size_t c = 0; c < fused_rows[r].size(); ++c) {
        const std::string& a = fused_rows[r][c];
        const std::string& b = unfused_rows[r][c];
        char* end_a = nullptr;
        char* end_b = nullptr;
        const double x = std::strtod(a.c_str(), &end_a), y = std::strtod(b.c_str(), &end_b);
        if (a.empty() || *end_a != '\0' || b.empty() || *end_b != '\0') {
          EXPECT_EQ(a, b) << name << " row " << r << " column " << c;
          continue;
        }
        ++numbers;
        differ += a != b;
        EXPECT_LE(std::abs(x - y), 1e-10 * std::max(1.0, std::abs(x))) << name << " row " << r << " column " << c;
      }
    }
  }
  EXPECT_GT(numbers, 1000);
  std::cout << differ << " of " << numbers << " numbers differ in their last digits\n";
}

TEST(ComputeCommand, CommandLineOverridesTheReference) {
  const std::string dir = MakeTempDir("cli_reference");
  std::string out, err;
  ASSERT_EQ(RunCli("compute " + Demo() + " --output " + dir + " --reference cap", &out, &err), 0) << err;
  for (const auto& row : ReadRows(ReadTextFile(dir + "/parities.csv"))) {
    if (row[2] == "cap" && row[1] != "kind") {
      EXPECT_EQ(row[3], "100") << row[0];
    }
  }
  EXPECT_NE(out.find("parities for 'all' (All items) (cap = 100)"), std::string::npos) << out;
}

TEST(ComputeCommand, PrintsTheRootTableAndTheCautions) {
  const std::string dir = MakeTempDir("cli_table");
  std::string out, err;
  ASSERT_EQ(RunCli("compute " + Demo() + " --output " + dir, &out, &err), 0) << err;
  // Region names from regions.csv stand beside the codes.
  EXPECT_NE(out.find("region  name                      rank     parity"), std::string::npos)
      << out;
  EXPECT_NE(out.find("Official figures come from the statistical authority."), std::string::npos);
  // The capital is the dearest region of the demo.
  EXPECT_NE(out.find("\ncap     Aurelmont Capital Region     1"), std::string::npos) << out;
}

TEST(ComputeCommand, UnlinkedHeadingExitsWithTwoAndNamesTheRegions) {
  const std::string dir = MakeTempDir("cli_unlinked");
  WriteTextFile(dir + "/prices.csv",
                "region,item,price,heading\nnorth,a,1,bread\nsouth,a,2,bread\neast,b,3,bread\nwest,b,4,bread\n");
  WriteTextFile(dir + "/expenditure.csv",
                "region,heading,expenditure\nnorth,bread,1\nsouth,bread,1\neast,bread,1\nwest,bread,1\n");
  WriteTextFile(dir + "/config.yaml", "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n");
  std::string out, err;
  EXPECT_EQ(RunCli("compute " + dir + "/config.yaml --output " + dir + "/out", &out, &err), 2);
  EXPECT_EQ(err.substr(0, err.find('\n')),
            "paritas: error: heading 'bread' is not linked: its regions fall into 2 groups that share no "
            "item: {east, west} and {north, south}");
  EXPECT_FALSE(fs::exists(dir + "/out/parities.csv"));
}

TEST(ComputeCommand, BadMethodNameListsTheAllowedOnes) {
  std::string out, err;
  EXPECT_EQ(RunCli("compute " + Demo() + " --elementary cdp --output " + MakeTempDir("cli_bad"), &out, &err), 1);
  EXPECT_EQ(err,
            "paritas: error: --elementary 'cdp' is not one of: cpd, cprd, jevons-geks, robust-cpd; did "
            "you mean 'cpd'?\n");
}

// Named values with '_' for '-' or misspelt get a suggestion on every option
// that takes one (weighted_mean used to pass as a region code).
TEST(ComputeCommand, SuggestsTheNameMeantForEveryNamedOption) {
  const std::pair<std::string, std::string> cases[] = {
      {"--reference weighted_mean",
       "--reference 'weighted_mean' is not one of: mean, weighted-mean, country, or a region code; did you "
       "mean 'weighted-mean'?"},
      {"--elementary Jevons_GEKS",
       "--elementary 'Jevons_GEKS' is not one of: cpd, cprd, jevons-geks, robust-cpd; did you mean "
       "'jevons-geks'?"},
      {"--aggregation geks_fisher",
       "--aggregation 'geks_fisher' is not one of: geks-fisher, geks-tornqvist, weighted-cpd, "
       "spanning-tree, geary-khamis, ikle-dikhanov-balk; did you mean 'geks-fisher'?"},
      {"--invalid-rows Skipp",
       "--invalid-rows 'Skipp' is not one of: stop, skip; did you mean 'skip'?"},
  };
  for (const auto& [arguments, message] : cases) {
    std::string out, err;
    EXPECT_EQ(
        RunCli("compute " + Demo() + " " + arguments + " --output " + MakeTempDir("cli_named"),
               &out, &err),
        1)
        << arguments;
    EXPECT_EQ(err, "paritas: error: " + message + "\n") << arguments;
  }
}

TEST(ComputeCommand, UnknownMatrixNodeSuggestsTheNearest) {
  std::string out, err;
  EXPECT_EQ(RunCli("compute " + Demo() + " --matrices fod --output " + MakeTempDir("cli_matrix"), &out, &err), 1);
  EXPECT_EQ(err, "paritas: error: matrices: node 'fod' is not in the classification; did you mean 'food'?\n");
}

// One list syntax everywhere: --matrices takes names separated by spaces
// or commas, as --parts does.
TEST(ComputeCommand, MatricesTakesACommaSeparatedList) {
  const std::string dir = MakeTempDir("cli_matrix_list");
  std::string out, err;
  ASSERT_EQ(
      RunCli("compute " + Demo() + " --no-report --matrices food,\" housing\" --output " + dir,
             &out, &err),
      0)
      << err;
  EXPECT_TRUE(fs::exists(dir + "/matrix/food.csv"));
  EXPECT_TRUE(fs::exists(dir + "/matrix/housing.csv"));
  EXPECT_FALSE(fs::exists(dir + "/matrix/clothing.csv"));
  EXPECT_EQ(RunCli("compute " + Demo() + " --matrices food,,housing --output " + dir, &out, &err),
            1);
  EXPECT_EQ(err, "paritas: error: --matrices: an empty name in 'food,,housing'\n");
}

// 'all' is the keyword only as the only value; beside other names it is a
// node code like any other (the demo's root is called 'all'), so only the
// named nodes get matrices.
TEST(ComputeCommand, MatricesAllBesideOtherNamesIsANodeCode) {
  const std::string dir = MakeTempDir("cli_matrix_all");
  std::string out, err;
  ASSERT_EQ(RunCli("compute " + Demo() + " --no-report --matrices all,food --output " + dir, &out,
                   &err),
            0)
      << err;
  EXPECT_TRUE(fs::exists(dir + "/matrix/all.csv"));
  EXPECT_TRUE(fs::exists(dir + "/matrix/food.csv"));
  EXPECT_FALSE(fs::exists(dir + "/matrix/housing.csv"));
}

TEST(ComputeCommand, SkipWritesRejectedRowsAndReconciles) {
  const std::string dir = MakeTempDir("cli_skip");
  WriteTextFile(dir + "/prices.csv",
                "region,item,price,heading\nnorth,a,1,bread\nsouth,a,-2,bread\nsouth,a,2,bread\n");
  WriteTextFile(dir + "/expenditure.csv", "region,heading,expenditure\nnorth,bread,1\nsouth,bread,1\n");
  WriteTextFile(dir + "/config.yaml",
                "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\ninvalid_rows: skip\n");
  std::string out, err;
  ASSERT_EQ(RunCli("compute " + dir + "/config.yaml --output " + dir + "/out", &out, &err), 0) << err;
  const auto rejected = ReadRows(ReadTextFile(dir + "/out/rejected.csv"));
  ASSERT_EQ(rejected.size(), 2u);
  EXPECT_EQ(rejected[0], (std::vector<std::string>{"file", "line", "reason", "raw"}));
  EXPECT_EQ(rejected[1][1], "3");
  EXPECT_EQ(rejected[1][2], dir + "/prices.csv:3:3: price '-2' is not a positive number");
  EXPECT_EQ(rejected[1][3], "south,a,-2,bread");
  // The warning goes to standard error, after the count on standard output.
  EXPECT_NE(out.find(" warnings (listed at the end, on standard error, and in warnings.csv)"),
            std::string::npos)
      << out;
  EXPECT_NE(err.find(" warnings (every one in warnings.csv):\n  invalid rows left out (1):\n"
                     "    1 invalid rows left out (listed in rejected.csv)\n"),
            std::string::npos)
      << err;
}

}  // namespace
}  // namespace paritas

namespace paritas {
namespace {

TEST(ComputeCommand, PrintsControlCharactersOfDataAsVisibleEscapes) {
  // An escape sequence in a code must reach the terminal as text, never raw.
  std::string out, err;
  const std::string config = testing::SourcePath("config/demo.yaml");
  EXPECT_EQ(testing::RunCli("compute " + config + " --output " + testing::MakeTempDir("cli_escape") +
                                " --reference \"$(printf 'X\\033[2J\\342\\200\\256Y')\"",
                            &out, &err),
            1);
  EXPECT_EQ(err.find('\x1b'), std::string::npos) << err;
  EXPECT_NE(err.find("reference region 'X\\x1b[2J\\u202eY' is not in the survey"), std::string::npos) << err;
}

// Runs the command line with `arguments` (no shell) and returns its exit
// code, setting *peak_kb to its peak resident memory (KiB); -1 on failure.
int RunCliForPeakMemory(const std::vector<std::string>& arguments, long* peak_kb) {
  std::vector<char*> argv = {const_cast<char*>(PARITAS_CLI_PATH)};
  for (const std::string& argument : arguments) argv.push_back(const_cast<char*>(argument.c_str()));
  argv.push_back(nullptr);
  const pid_t pid = ::fork();
  if (pid == 0) {
    const int null = ::open("/dev/null", O_RDWR);
    if (null < 0) ::_exit(126);
    ::dup2(null, 0);
    ::dup2(null, 1);
    ::dup2(null, 2);
    ::execv(PARITAS_CLI_PATH, argv.data());
    ::_exit(127);
  }
  int status = 0;
  rusage usage{};
  if (pid < 0 || ::wait4(pid, &status, 0, &usage) != pid) return -1;
  *peak_kb = usage.ru_maxrss;
  return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

// Writes a generated survey of many regions, 4 items a heading and one
// quote a cell into `folder`; false (and a test failure) if it cannot.
bool WriteWideSurvey(int num_regions, int num_headings, int num_groups, const std::string& folder) {
  synthetic::SyntheticOptions options;
  options.num_regions = num_regions;
  options.num_headings = num_headings;
  options.items_per_heading = 4;
  options.quotes_per_cell = 1;
  options.num_groups = num_groups;
  std::string error;
  const bool written = synthetic::WriteSurvey(synthetic::Generate(options), folder, &error);
  EXPECT_TRUE(written) << error;
  return written;
}

// Every node's matrix and bilateral table, asked for on a survey of 600
// regions, is about 0.4 GB of text. Each file goes to the writer block by
// block as it is formatted, one file after the other, so the run's peak
// stays far below what it writes. Before, every node's two files were made
// whole and held until the last was made (the peak above the total written).
TEST(ComputeCommand, WritesEveryMatrixWithoutHoldingThemAll) {
#if defined(PARITAS_TEST_ADDRESS_SANITIZER) || defined(PARITAS_TEST_THREAD_SANITIZER)
  // A sanitizer holds freed memory back (AddressSanitizer's quarantine) and
  // keeps shadow memory: the peak would be its own, not the program's.
  GTEST_SKIP() << "peak memory is not the program's under a sanitizer";
#endif
  const std::string dir = MakeTempDir("cli_all_matrices");
  struct RemoveOnExit {
    std::string dir;
    ~RemoveOnExit() { fs::remove_all(dir); }  // 0.4 GB of tables
  } remove_on_exit{dir};
  ASSERT_TRUE(WriteWideSurvey(600, 10, 4, dir + "/survey"));
  long peak_kb = -1;
  // Two threads, as on the benchmark machine: each thread may format a few
  // blocks ahead of the writer, so the peak grows with the threads.
  ASSERT_EQ(RunCliForPeakMemory({"compute", dir + "/survey/config.yaml", "--no-report", "--matrices", "all",
                                 "--threads", "2", "--output", dir + "/out"},
                                &peak_kb),
            0);
  uintmax_t written = 0;
  for (const char* folder : {"/out/matrix", "/out/bilateral"}) {
    for (const auto& entry : fs::directory_iterator(dir + folder)) written += entry.file_size();
  }
  EXPECT_GT(written, uintmax_t{300} << 20);
  EXPECT_LT(static_cast<double>(peak_kb) * 1024, 0.5 * static_cast<double>(written))
      << "peak " << peak_kb << " KiB against " << written << " bytes of matrices";
}

// Without the report the root's spreads are summarised without medians
// (which only the report shows) and no cell's fitted value is kept: on a
// survey past matrices_up_to_regions (520 regions, so the root's GEKS and
// spreads come by row blocks), every file but run.json and report.html, and
// the terminal's table of largest spreads, are byte for byte those of the
// run with the report.
TEST(ComputeCommand, WithoutTheReportAWideSurveyGivesTheSameFilesAndSpreads) {
  const std::string dir = MakeTempDir("cli_wide_no_report");
  ASSERT_TRUE(WriteWideSurvey(520, 6, 3, dir + "/survey"));
  const std::string run = "compute " + dir + "/survey/config.yaml --threads 2 --output " + dir;
  std::string with_out, without_out, err;
  ASSERT_EQ(RunCli(run + "/with", &with_out, &err), 0) << err;
  ASSERT_EQ(RunCli(run + "/without --no-report", &without_out, &err), 0) << err;
  ASSERT_TRUE(fs::exists(dir + "/with/report.html"));
  ASSERT_FALSE(fs::exists(dir + "/with/bilateral"));  // the root's spreads came by row blocks
  int compared = 0;
  for (const auto& entry : fs::recursive_directory_iterator(dir + "/with")) {
    if (!entry.is_regular_file()) continue;
    const std::string name = fs::relative(entry.path(), dir + "/with").string();
    if (name == "run.json" || name == "report.html") continue;
    EXPECT_EQ(ReadTextFile(entry.path().string()), ReadTextFile(dir + "/without/" + name)) << name;
    ++compared;
  }
  EXPECT_GE(compared, 4);
  // The table from its header to the line after its last region.
  const auto table = [](const std::string& out) {
    const size_t begin = out.find("\nregion ");
    if (begin == std::string::npos) return std::string();
    return out.substr(begin, out.find("\n(P-L spread", begin) - begin);
  };
  ASSERT_FALSE(table(with_out).empty()) << with_out;
  EXPECT_GT(std::count(with_out.begin(), with_out.end(), '\n'), 520);
  EXPECT_EQ(table(without_out), table(with_out));
}

}  // namespace
}  // namespace paritas
