// End-to-end runs of the paritas binary: each case writes a small survey and
// configuration to its own folder, runs the command with stdout and stderr
// redirected to files, and checks the exit code and the text the user sees.
#include <sys/wait.h>

#include <cstdio>
#include <cstdlib>
#include <regex>
#include <string>

#include "test_util.h"

namespace paritas {
namespace {

using ::paritas::testing::MakeTempDir;
using ::paritas::testing::ReadTextFile;
using ::paritas::testing::SourcePath;
using ::paritas::testing::WriteTextFile;

struct CliRun {
  int exit_code = -1;
  std::string out;
  std::string err;
};

// Runs `paritas ARGS` (arguments already quoted for the shell) with its
// output captured in `dir`.
CliRun RunCli(const std::string& args, const std::string& dir) {
  const std::string out_path = dir + "/cli_stdout.txt";
  const std::string err_path = dir + "/cli_stderr.txt";
  const std::string command =
      "'" + std::string(PARITAS_CLI_PATH) + "' " + args + " >'" + out_path + "' 2>'" + err_path + "' </dev/null";
  const int status = std::system(command.c_str());
  CliRun run;
  run.exit_code = WIFEXITED(status) ? WEXITSTATUS(status) : -1;
  run.out = ReadTextFile(out_path);
  run.err = ReadTextFile(err_path);
  return run;
}

const char kPrices[] =
    "region,item,price,heading,shop\n"
    "north,bread,2.0,food,a\n"
    "north,milk,1.0,food,a\n"
    "south,bread,3.0,food,b\n"
    "south,milk,1.5,food,b\n"
    "east,bread,2.5,food,c\n"
    "east,rent,500,housing,c\n"
    "north,rent,400,housing,c\n";
const char kExpenditure[] =
    "region,heading,expenditure\n"
    "north,food,100\n"
    "south,food,120\n"
    "north,housing,50\n"
    "east,housing,70\n";

// Writes a survey and run.yaml into a fresh folder; returns the folder.
std::string WriteSurvey(const std::string& name, const std::string& prices = kPrices,
                        const std::string& extra_config = "") {
  const std::string dir = MakeTempDir("cli_" + name);
  WriteTextFile(dir + "/data/prices.csv", prices);
  WriteTextFile(dir + "/data/expenditure.csv", kExpenditure);
  WriteTextFile(dir + "/run.yaml",
                "survey:\n  prices: data/prices.csv\n  expenditure: data/expenditure.csv\n" + extra_config);
  return dir;
}

bool Contains(const std::string& text, const std::string& part) { return text.find(part) != std::string::npos; }

TEST(CliCheck, PassesTheDemoConfigurationWithExitZero) {
  const std::string dir = MakeTempDir("cli_demo");
  const CliRun run = RunCli("check '" + SourcePath("config/demo.yaml") + "'", dir);
  EXPECT_EQ(run.exit_code, 0) << run.err;
  EXPECT_EQ(run.err, "");
  EXPECT_EQ(run.out.rfind("survey: 16 regions, 200 items, 29 basic headings in 11 aggregates and 2 groups, "
                             "8,554 quotes", 0), 0u)
      << run.out;
  EXPECT_TRUE(Contains(run.out, "rejected rows: 0\n")) << run.out;
  EXPECT_TRUE(Contains(run.out, "usable: the survey is usable\n")) << run.out;
}

TEST(CliCheck, DescribesCountsPerHeadingGapsAndIgnoredColumns) {
  const std::string dir = WriteSurvey("describe");
  const CliRun run = RunCli("check '" + dir + "/run.yaml'", dir);
  EXPECT_EQ(run.exit_code, 0) << run.err;
  EXPECT_TRUE(Contains(run.out, "survey: 3 regions, 3 items, 2 basic headings in 1 aggregate, 7 quotes in 7 cells\n"))
      << run.out;
  EXPECT_TRUE(Contains(run.out, dir + "/data/prices.csv: 7 rows read, 7 used, 0 rejected\n")) << run.out;
  EXPECT_TRUE(Contains(run.out, "ignored columns: shop\n")) << run.out;
  // Per heading: regions priced, items priced, share of cells filled (5 of 3 x 2).
  EXPECT_TRUE(std::regex_search(run.out, std::regex("\n  food +3/3 +2 +83\\.3 % +5 ")) ) << run.out;
  EXPECT_TRUE(std::regex_search(run.out, std::regex("\n  housing +2/3 +1 +100\\.0 % +2 "))) << run.out;
  EXPECT_TRUE(Contains(run.out, "regions with no prices in a heading:\n  housing: south\n")) << run.out;
  EXPECT_TRUE(Contains(run.out, "regions with prices but no expenditure row in a heading:\n  food: east\n"))
      << run.out;
}

TEST(CliCheck, ReportsUnlinkedGroupsByNameAndExitsOne) {
  const std::string dir = WriteSurvey("unlinked",
                                      "region,item,price,heading\n"
                                      "north,bread,2,food\nsouth,bread,3,food\n"
                                      "east,milk,1,food\nwest,milk,1.2,food\nnorth,rent,5,housing\n");
  const CliRun run = RunCli("check '" + dir + "/run.yaml'", dir);
  EXPECT_EQ(run.exit_code, 1);
  // Regions sorted: east 0, north 1, south 2, west 3; ties by smallest region first.
  EXPECT_TRUE(Contains(run.out, "unlinked regions (parities not identified):\n  food: {east, west} and {north, south}\n"))
      << run.out;
  EXPECT_TRUE(Contains(run.out, "not usable: 1 heading(s) have unlinked regions: parities are not identified there\n"))
      << run.out;
}

TEST(CliCheck, ReportsAMissingConfigurationOnStderr) {
  const std::string dir = MakeTempDir("cli_missing_config");
  const CliRun run = RunCli("check '" + dir + "/none.yaml'", dir);
  EXPECT_EQ(run.exit_code, 1);
  EXPECT_EQ(run.err, "paritas: error: " + dir + "/none.yaml: cannot open file: No such file or directory\n");
  EXPECT_EQ(run.out, "");
}

TEST(CliCheck, SuggestsTheNearestKeyForAConfigurationTypo) {
  const std::string dir = WriteSurvey("typo", kPrices, "refrence: mean\n");
  const CliRun run = RunCli("check '" + dir + "/run.yaml'", dir);
  EXPECT_EQ(run.exit_code, 1);
  EXPECT_EQ(run.err, "paritas: error: " + dir + "/run.yaml:4:1: unknown key 'refrence'; did you mean 'reference'?\n");
}

TEST(CliCheck, ListsTheAllowedPoliciesForABadInvalidRowsOption) {
  const std::string dir = WriteSurvey("bad_option");
  const CliRun run = RunCli("check '" + dir + "/run.yaml' --invalid-rows maybe", dir);
  EXPECT_EQ(run.exit_code, 1);
  EXPECT_EQ(run.err, "paritas: error: --invalid-rows 'maybe' is not one of: stop, skip\n");
}

// Numbers on the command line get our message (the option, the rule, the
// value), not CLI11's "Value abc not in range 0 to 1024".
TEST(CliCheck, RefusesAThreadCountThatIsNotAWholeNumberInRange) {
  const std::string dir = WriteSurvey("bad_threads");
  for (const char* value : {"abc", "2000", "-1", "1.5", "''"}) {
    const CliRun run = RunCli("check '" + dir + "/run.yaml' --threads " + value, dir);
    EXPECT_EQ(run.exit_code, 1) << value;
    const std::string shown = std::string(value) == "''" ? "" : value;
    EXPECT_EQ(run.err,
              "paritas: error: --threads must be a whole number from 0 (all cores) to "
              "1024, found '" +
                  shown + "'\n")
        << value;
  }
  const CliRun ok = RunCli("check '" + dir + "/run.yaml' --threads 2", dir);
  EXPECT_EQ(ok.exit_code, 0) << ok.err;
}

using ::paritas::testing::CountOf;

// check listed each rejected row on standard output and again on standard
// error when the rows stopped the run.
TEST(CliCheck, ListsEachRejectedRowOnce) {
  std::string prices = kPrices;
  prices.replace(prices.find("south,milk,1.5"), 14, "south,milk,abc");
  const std::string row = "/data/prices.csv:5:3: price 'abc' is not a number\n";
  for (const char* policy : {"stop", "skip"}) {
    const std::string dir = WriteSurvey(std::string("rejected_once_") + policy, prices);
    const CliRun run = RunCli("check '" + dir + "/run.yaml' --invalid-rows " + policy, dir);
    EXPECT_EQ(CountOf(run.out + run.err, row), 1u) << policy << "\n" << run.out << run.err;
    if (std::string(policy) == "stop") {
      // With the message that stopped the run, as compute prints them.
      EXPECT_EQ(run.exit_code, 1);
      EXPECT_EQ(run.err, dir + row +
                             "paritas: error: 1 invalid row; fix them, or set invalid_rows: skip "
                             "to leave them out\n");
    } else {
      EXPECT_EQ(run.exit_code, 0) << run.err;
      EXPECT_EQ(run.err, "");
      EXPECT_TRUE(Contains(run.out, "rejected rows: 1\n" + dir + row)) << run.out;
    }
  }
}

// The help of every command shows each option's default, the exit codes
// and one example command line.
TEST(CliHelp, EveryCommandShowsDefaultsExitCodesAndAnExample) {
  const std::string dir = MakeTempDir("cli_help");
  const std::string exit_codes =
      "\nexit codes:\n"
      "  0  ok\n"
      "  1  invalid input or configuration\n"
      "  2  computation failed\n"
      "  3  warnings or gross outliers under --strict (compute, sensitivity)\n";
  for (const std::string command :
       {"", "check", "compute", "sensitivity", "deflate", "pair", "publish", "compare", "carry"}) {
    const CliRun run = RunCli(command + " --help", dir);
    EXPECT_EQ(run.exit_code, 0) << command;
    EXPECT_EQ(run.err, "") << command;
    const std::string& help = run.out;
    EXPECT_EQ(help.find("Usage: paritas " + (command.empty() ? "" : command + " ")),
              help.find('\n') + 1)
        << help;
    EXPECT_TRUE(Contains(help, exit_codes)) << help;
    EXPECT_TRUE(
        Contains(help, "\nexample:\n  paritas " + (command.empty() ? "compute" : command) + " "))
        << help;
    // Each option entry (wrapped lines joined) that takes a value and is not
    // required names its default.
    std::vector<std::string> entries;
    size_t start = 0;
    while (start < help.size()) {
      const size_t end = help.find('\n', start);
      const std::string line = help.substr(start, end - start);
      start = end == std::string::npos ? help.size() : end + 1;
      if (line.rfind("  -", 0) == 0) {
        entries.push_back(line);
      } else if (!entries.empty() && line.rfind("       ", 0) == 0) {
        entries.back() += line;
      }
    }
    EXPECT_FALSE(entries.empty()) << help;
    for (const std::string& entry : entries) {
      const bool takes_value =
          std::regex_search(entry, std::regex("^  --[a-z-]+ (TEXT|INT|NUMBER)"));
      if (takes_value && !Contains(entry, "REQUIRED")) {
        EXPECT_TRUE(Contains(entry, "default")) << command << ": " << entry;
      }
    }
  }
}

TEST(CliCheck, ReportsAMissingArgumentWithTheErrorPrefix) {
  const std::string dir = MakeTempDir("cli_no_args");
  const CliRun run = RunCli("check", dir);
  EXPECT_EQ(run.exit_code, 1);
  EXPECT_EQ(run.err.rfind("paritas: error: ", 0), 0u) << run.err;
}

TEST(CliCheck, ReportsAMissingPricesFile) {
  const std::string dir = WriteSurvey("missing_prices");
  std::remove((dir + "/data/prices.csv").c_str());
  const CliRun run = RunCli("check '" + dir + "/run.yaml'", dir);
  EXPECT_EQ(run.exit_code, 1);
  EXPECT_EQ(run.err, "paritas: error: " + dir + "/data/prices.csv: cannot open file: No such file or directory\n");
}

std::string PricesWithBadRows(int num_bad) {
  std::string text = kPrices;
  for (int k = 0; k < num_bad; ++k) text += "south,item" + std::to_string(k) + ",-4.10,food,x\n";
  return text;
}

TEST(CliCheck, StopsOnBadRowsListingTheFirstTwentyOnStderr) {
  const std::string dir = WriteSurvey("stop_25", PricesWithBadRows(25));
  const CliRun run = RunCli("check '" + dir + "/run.yaml'", dir);
  EXPECT_EQ(run.exit_code, 1);
  const std::string prices = dir + "/data/prices.csv";
  std::string expected;
  for (int k = 0; k < 20; ++k) {
    expected += prices + ":" + std::to_string(9 + k) + ":3: price '-4.10' is not a positive number\n";
  }
  expected += "... 5 more\n";
  expected += "paritas: error: 25 invalid rows (the first 20 shown); fix them, or set invalid_rows: skip to "
              "leave them out\n";
  EXPECT_EQ(run.err, expected);
  EXPECT_TRUE(Contains(run.out, prices + ": 32 rows read, 7 used, 25 rejected\n")) << run.out;
}

TEST(CliCheck, SkipGoesOnAndCountsTheRejectedRows) {
  const std::string dir = WriteSurvey("skip_25", PricesWithBadRows(25), "invalid_rows: skip\n");
  const CliRun run = RunCli("check '" + dir + "/run.yaml'", dir);
  EXPECT_EQ(run.exit_code, 0) << run.err;
  EXPECT_EQ(run.err, "");
  EXPECT_TRUE(Contains(run.out, "rejected rows: 25\n")) << run.out;
  EXPECT_TRUE(Contains(run.out, "usable: the survey is usable\n")) << run.out;
  // The command-line option overrides the configuration.
  const CliRun stop = RunCli("check '" + dir + "/run.yaml' --invalid-rows STOP", dir);
  EXPECT_EQ(stop.exit_code, 1);
}

TEST(CliCheck, ReportsAFileCutMidQuote) {
  const std::string dir = WriteSurvey("cut", std::string(kPrices) + "south,\"eggs");
  const CliRun run = RunCli("check '" + dir + "/run.yaml'", dir);
  EXPECT_EQ(run.exit_code, 1);
  EXPECT_EQ(run.err,
            "paritas: error: " + dir + "/data/prices.csv:9:2: unterminated quoted field (opened here)\n");
}

// Devices and pipes as inputs: reading stops at the limits with exit code 1,
// and the limits: section raises them.
TEST(CliCheck, StopsAtTheLimitsOnDevicesAndPipes) {
  const std::string dir = WriteSurvey("limits");
  WriteTextFile(dir + "/zero.yaml",
                "survey:\n  prices: /dev/zero\n  expenditure: data/expenditure.csv\n");
  CliRun run = RunCli("check '" + dir + "/zero.yaml'", dir);
  EXPECT_EQ(run.exit_code, 1);
  EXPECT_EQ(run.err,
            "paritas: error: /dev/zero:1:1: a field longer than 1 MiB (limits.max_field_bytes); "
            "raise the limit if the file is right\n");
  WriteTextFile(dir + "/small.yaml",
                "survey:\n  prices: data/prices.csv\n  expenditure: data/expenditure.csv\n"
                "limits:\n  max_record_bytes: 20\n");
  run = RunCli("check '" + dir + "/small.yaml'", dir);
  EXPECT_EQ(run.exit_code, 1);
  EXPECT_EQ(run.err, "paritas: error: " + dir +
                         "/data/prices.csv:1: a record longer than 20 bytes "
                         "(limits.max_record_bytes); raise the limit if the file is right\n");
  // prices.csv through a pipe (the shell's process substitution).
  const std::string command =
      "'" + std::string(PARITAS_CLI_PATH) + "' check '" + dir + "/pipe.yaml' >/dev/null 2>&1";
  WriteTextFile(dir + "/pipe.yaml",
                "survey:\n  prices: /dev/stdin\n  expenditure: data/expenditure.csv\n");
  const std::string piped = "cat '" + dir + "/data/prices.csv' | " + command;
  const int status = std::system(piped.c_str());
  EXPECT_EQ(WIFEXITED(status) ? WEXITSTATUS(status) : -1, 0);
}

TEST(CliCompute, WritesRejectedCsvAndReconcilingRowCountsInRunJson) {
  const std::string dir = WriteSurvey("compute_skip", PricesWithBadRows(3), "invalid_rows: skip\n");
  const CliRun run = RunCli("compute '" + dir + "/run.yaml' --no-report --output '" + dir + "/out'", dir);
  ASSERT_EQ(run.exit_code, 0) << run.err;
  const std::string prices = dir + "/data/prices.csv";
  std::string expected = "file,line,reason,raw\n";
  for (int k = 0; k < 3; ++k) {
    const std::string line = std::to_string(9 + k);
    expected += prices + "," + line + "," + prices + ":" + line + ":3: price '-4.10' is not a positive number," +
                "\"south,item" + std::to_string(k) + ",-4.10,food,x\"\n";
  }
  EXPECT_EQ(ReadTextFile(dir + "/out/rejected.csv"), expected);

  const std::string json = ReadTextFile(dir + "/out/run.json");
  const std::regex counts("\"role\": \"(\\w+)\",[^}]*\"rows_read\": (\\d+),\\s*\"rows_used\": (\\d+),\\s*"
                          "\"rows_rejected\": (\\d+)");
  int num_inputs = 0;
  for (auto it = std::sregex_iterator(json.begin(), json.end(), counts); it != std::sregex_iterator(); ++it) {
    const std::smatch& m = *it;
    ++num_inputs;
    EXPECT_EQ(std::stoll(m[2]), std::stoll(m[3]) + std::stoll(m[4])) << m[1];
    if (m[1] == "prices") {
      EXPECT_EQ(std::stoll(m[2]), 10);
      EXPECT_EQ(std::stoll(m[4]), 3);
    }
  }
  EXPECT_EQ(num_inputs, 2) << json;
}

}  // namespace
}  // namespace paritas
