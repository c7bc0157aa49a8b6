// End-to-end runs with analytic groups and labels through the real
// executable: compute writes the groups and labels to parities.csv, the
// terminal and the report; deflate, pair and sensitivity take a group by
// name. Data: the invented survey of tests/data/groups.
#include <gtest/gtest.h>

#include <filesystem>
#include <sstream>
#include <string>

#include "test_util.h"

namespace paritas {
namespace {

using testing::MakeTempDir;
using testing::ReadTextFile;
using testing::RunCli;
using testing::TestDataPath;
using testing::WriteTextFile;

// A run folder for the fixture with three groups and labels (one with
// characters HTML must escape).
std::string WriteGroupsCase(const std::string& name) {
  const std::string dir = MakeTempDir(name);
  for (const char* file : {"prices.csv", "expenditure.csv", "regions.csv", "classification.yaml"}) {
    WriteTextFile(dir + "/" + file, ReadTextFile(TestDataPath(std::string("groups/") + file)));
  }
  WriteTextFile(
      dir + "/run.yaml",
      "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n"
      "  regions: regions.csv\nclassification: classification.yaml\n"
      "matrices: [all, all_but_housing]\n"
      "labels:\n  all: All items\n  food: \"Food & <drink>\"\n  rent: Actual rents\n"
      "groups:\n"
      "  all_but_housing: {label: All items without housing, from: all, without: [housing]}\n"
      "  energy: {label: Energy, of: [power, fuel]}\n"
      "  mixed: {of: [food, power], without: milk}\n");
  WriteTextFile(dir + "/incomes.csv", "id,region,income\n1,r1,1000\n2,r4,1000\n");
  return dir;
}

// The parity column of `node` and `region` in parities.csv text.
double ParityOf(const std::string& csv, const std::string& prefix) {
  const size_t at = csv.find("\n" + prefix);
  EXPECT_NE(at, std::string::npos) << prefix;
  if (at == std::string::npos) return 0.0;
  std::istringstream row(csv.substr(at + 1 + prefix.size()));
  std::string parity;
  std::getline(row, parity, ',');
  return std::stod(parity);
}

TEST(GroupsCommand, ComputeWritesGroupsAndLabelsEverywhere) {
  const std::string dir = WriteGroupsCase("cli_groups_compute");
  std::string out, err;
  ASSERT_EQ(RunCli("compute " + dir + "/run.yaml --output " + dir + "/out", &out, &err), 0) << err;
  EXPECT_NE(out.find("7 basic headings in 4 aggregates and 3 groups"), std::string::npos) << out;
  EXPECT_NE(out.find("parities for 'all' (All items) (mean = 100)"), std::string::npos) << out;
  EXPECT_NE(out.find("  'all_but_housing' (All items without housing): 4 of 7 basic headings; "
                     "parity "),
            std::string::npos)
      << out;
  EXPECT_NE(out.find("  'mixed': 2 of 7 basic headings"), std::string::npos) << out;
  // Region names from regions.csv beside the codes.
  EXPECT_NE(out.find("region  name        rank"), std::string::npos) << out;
  EXPECT_NE(out.find("Northmarch"), std::string::npos) << out;

  const std::string csv = ReadTextFile(dir + "/out/parities.csv");
  EXPECT_NE(csv.find(",share_external,label,basket_share,warnings\n"), std::string::npos);
  EXPECT_NE(csv.find("\nall_but_housing,group,r1,"), std::string::npos);
  EXPECT_NE(csv.find(",All items without housing,"), std::string::npos);
  // A label with a comma-free special character is written as is.
  EXPECT_NE(csv.find(",Food & <drink>,"), std::string::npos);
  EXPECT_TRUE(std::filesystem::exists(dir + "/out/matrix/all_but_housing.csv"));
  EXPECT_TRUE(std::filesystem::exists(dir + "/out/bilateral/all_but_housing.csv"));

  // The run record keeps the definitions, so runs with other groups differ.
  const std::string record = ReadTextFile(dir + "/out/run.json");
  EXPECT_NE(record.find("\"code\": \"all_but_housing\""), std::string::npos);
  EXPECT_NE(record.find("\"num_groups\": 3"), std::string::npos);
  EXPECT_NE(record.find("\"rent\": \"Actual rents\""), std::string::npos);
  ASSERT_EQ(RunCli("check " + dir + "/run.yaml", &out, &err), 0) << err;
  EXPECT_NE(out.find("7 basic headings in 4 aggregates and 3 groups"), std::string::npos) << out;

  const std::string html = ReadTextFile(dir + "/out/report.html");
  EXPECT_NE(html.find("<a href=\"#groups\">Groups</a>"), std::string::npos);
  EXPECT_NE(html.find("<section id=\"groups\""), std::string::npos);
  EXPECT_NE(html.find("<td><code>all_but_housing</code></td><td>All items without housing</td>"
                      "<td><div class=\"long\">All items (all) without housing</div></td>"),
            std::string::npos);
  EXPECT_NE(html.find("Regional price levels: All items (all)"), std::string::npos);
  // Labels are escaped: the by-aggregate grid's column and the coverage rows.
  EXPECT_NE(html.find("Food &amp; &lt;drink&gt;"), std::string::npos);
  EXPECT_EQ(html.find("Food & <drink>"), std::string::npos);
  EXPECT_NE(html.find(">Actual rents</text>"), std::string::npos);
  EXPECT_NE(html.find(">Energy</text>"), std::string::npos);
}

TEST(GroupsCommand, DeflatePairAndSensitivityTakeAGroupByName) {
  const std::string dir = WriteGroupsCase("cli_groups_use");
  std::string out, err;
  ASSERT_EQ(RunCli("compute " + dir + "/run.yaml --output " + dir + "/out --no-report", &out, &err),
            0)
      << err;
  const std::string csv = ReadTextFile(dir + "/out/parities.csv");
  const double r1 = ParityOf(csv, "all_but_housing,group,r1,");
  const double r4 = ParityOf(csv, "all_but_housing,group,r4,");

  ASSERT_EQ(RunCli("deflate --parities " + dir + "/out --input " + dir + "/incomes.csv --output " +
                       dir + "/real.csv --value-column income --node all_but_housing --with-parity",
                   &out, &err),
            0)
      << err;
  EXPECT_NE(out.find("by node 'all_but_housing'"), std::string::npos) << out;
  std::istringstream real(ReadTextFile(dir + "/real.csv"));
  std::string header, row1, row2;
  std::getline(real, header);
  std::getline(real, row1);
  std::getline(real, row2);
  EXPECT_EQ(header, "id,region,income,income_real,parity");
  // income_real = 1000 / (parity / 100), the group's parity of each region.
  EXPECT_NEAR(std::stod(row1.substr(row1.find(",1000,") + 6)), 1000.0 / (r1 / 100.0), 1e-9);
  EXPECT_NEAR(std::stod(row2.substr(row2.find(",1000,") + 6)), 1000.0 / (r4 / 100.0), 1e-9);

  ASSERT_EQ(
      RunCli("pair " + dir + "/run.yaml --from r1 --to r4 --node energy --csv " + dir + "/pair.csv",
             &out, &err),
      0)
      << err;
  EXPECT_EQ(ReadTextFile(dir + "/pair.csv").substr(0, 73),
            "measure,value\nfrom,r1\nto,r4\nnode,energy\nnode_label,Energy\nnum_headings,2\n");
  EXPECT_NE(out.find("'r4' relative to 'r1' at 'energy' (Energy) (group, 2 headings priced in "
                     "both)"),
            std::string::npos)
      << out;
  EXPECT_EQ(RunCli("pair " + dir + "/run.yaml --from r1 --to r4 --node enrgy", &out, &err), 1);
  EXPECT_EQ(err,
            "paritas: error: node 'enrgy' is not in the classification; did you mean 'energy'?\n");

  ASSERT_EQ(RunCli("sensitivity " + dir + "/run.yaml --output " + dir +
                       "/out --replicates 20 --parts bootstrap --node all_but_housing",
                   &out, &err),
            0)
      << err;
  EXPECT_NE(out.find("sensitivity of 'all_but_housing' (All items without housing), dearest "
                     "first:"),
            std::string::npos)
      << out;
  const std::string boot = ReadTextFile(dir + "/out/sensitivity/bootstrap.csv");
  EXPECT_NE(boot.find("\nall_but_housing,r1,"), std::string::npos) << boot.substr(0, 200);
  EXPECT_NE(boot.find("\nmixed,r6,"), std::string::npos);
  // The group's bootstrap interval brackets the real income deflate gives.
  ASSERT_EQ(
      RunCli("deflate --parities " + dir + "/out --input " + dir + "/incomes.csv --output " + dir +
                 "/real_interval.csv --value-column income --node all_but_housing "
                 "--interval",
             &out, &err),
      0)
      << err;
  const std::string with_interval = ReadTextFile(dir + "/real_interval.csv");
  EXPECT_EQ(with_interval.substr(0, with_interval.find('\n')),
            "id,region,income,income_real,income_real_lower,income_real_upper");
  EXPECT_EQ(RunCli("sensitivity " + dir + "/run.yaml --output " + dir +
                       "/out2 --replicates 20 --parts bootstrap --node mixd",
                   &out, &err),
            1);
  EXPECT_EQ(err,
            "paritas: error: node 'mixd' is not in the classification; did you mean 'mixed'?\n");
}

}  // namespace
}  // namespace paritas
