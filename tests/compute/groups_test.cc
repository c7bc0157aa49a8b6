// Tests of analytic groups and labels: a group's parities equal those of the
// same aggregation run on a classification whose root holds exactly the
// group's headings (the data cut to those headings), for every registered
// aggregation method; the exact message for each mistake in `groups:` and
// `labels:`. Data: the invented survey of tests/data/groups.
#include <cmath>
#include <set>
#include <sstream>

#include "paritas/aggregation/aggregation_method.h"
#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "paritas/compute/compute.h"
#include "paritas/output/output_writers.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey_loader.h"
#include "test_util.h"

namespace paritas {
namespace {

using testing::IsClose;
using testing::MakeTempDir;
using testing::ReadTextFile;
using testing::TestDataPath;
using testing::WriteTextFile;

constexpr char kGroups[] =
    "groups:\n"
    "  all_but_housing: {label: All items without housing, from: all, without: [housing]}\n"
    "  energy: {label: Energy, of: [power, fuel]}\n"
    "  mixed: {of: [food, power], without: milk}\n";

// Copies the fixture into a fresh folder, keeping the price and expenditure
// rows of `keep` headings only (all when empty), and writes run.yaml with
// the classification `tree` and the `extra` keys.
std::string WriteCase(const std::string& name, const std::string& tree, const std::string& extra,
                      const std::set<std::string>& keep = {}) {
  const std::string dir = MakeTempDir(name);
  for (const char* file : {"prices.csv", "expenditure.csv"}) {
    std::istringstream in(ReadTextFile(TestDataPath(std::string("groups/") + file)));
    std::string line, out;
    std::getline(in, line);
    out = line + "\n";
    while (std::getline(in, line)) {
      const std::string heading =
          std::string(file) == "prices.csv"
              ? line.substr(line.rfind(',') + 1)
              : line.substr(line.find(',') + 1, line.rfind(',') - line.find(',') - 1);
      if (keep.empty() || keep.count(heading)) out += line + "\n";
    }
    WriteTextFile(dir + "/" + file, out);
  }
  WriteTextFile(dir + "/regions.csv", ReadTextFile(TestDataPath("groups/regions.csv")));
  WriteTextFile(dir + "/run.yaml",
                "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n"
                "  regions: regions.csv\nclassification:\n" +
                    tree + extra);
  return dir;
}

const char kTree[] =
    "  all:\n    food: [bread, milk]\n    housing: [rent, water, power]\n"
    "    transport: [fuel, phone]\n";

struct Computed {
  Survey survey;
  ParityResult result;
};

Computed ComputeCase(const std::string& dir, const std::string& aggregation) {
  RunConfig config;
  std::string error;
  Computed run;
  EXPECT_TRUE(LoadRunConfig(dir + "/run.yaml", &config, &error)) << error;
  LoadSummary load;
  EXPECT_TRUE(LoadSurvey(config, LoadOptions(), &run.survey, &load)) << load.message;
  ComputeOptions options = ComputeOptions::FromConfig(config);
  options.aggregation = aggregation;
  ComputeSummary summary;
  EXPECT_TRUE(ComputeParities(run.survey, options, &run.result, &summary)) << summary.message;
  return run;
}

// Every number of node `a` of one run equals node `b` of the other.
void ExpectSameNode(const Computed& x, int a, const Computed& y, int b) {
  const NodeResult& n = x.result.nodes[a];
  const NodeResult& m = y.result.nodes[b];
  ASSERT_EQ(n.parity.size(), m.parity.size());
  for (int r = 0; r < n.parity.size(); ++r) {
    EXPECT_TRUE(IsClose(n.parity(r), m.parity(r), 1e-12)) << "region " << r;
    EXPECT_TRUE(IsClose(n.expenditure(r), m.expenditure(r), 1e-12)) << "region " << r;
    EXPECT_TRUE(IsClose(n.real_expenditure(r), m.real_expenditure(r), 1e-12)) << "region " << r;
    EXPECT_EQ(n.rank(r), m.rank(r)) << "region " << r;
    EXPECT_EQ(n.num_headings(r), m.num_headings(r)) << "region " << r;
  }
}

class GroupEqualsItsOwnTree : public ::testing::TestWithParam<std::string> {};

// The group 'energy' (power under housing, fuel under transport) and the
// group 'mixed' (food without milk, and power) against a root holding only
// their headings.
TEST_P(GroupEqualsItsOwnTree, ForAListOfNodes) {
  const Computed full =
      ComputeCase(WriteCase("groups_list_full_" + GetParam(), kTree, kGroups), GetParam());
  const Computed energy = ComputeCase(WriteCase("groups_list_energy_" + GetParam(),
                                                "  energy: [power, fuel]\n", "", {"power", "fuel"}),
                                      GetParam());
  const Computed mixed = ComputeCase(WriteCase("groups_list_mixed_" + GetParam(),
                                               "  mixed: [bread, power]\n", "", {"bread", "power"}),
                                     GetParam());
  const Classification& tree = full.survey.classification;
  ASSERT_EQ(tree.FindNode("energy"), tree.num_tree_nodes() + 1);
  ExpectSameNode(full, tree.FindNode("energy"), energy, 0);
  ExpectSameNode(full, tree.FindNode("mixed"), mixed, 0);
}

// "All items without housing" against the tree with housing taken out.
TEST_P(GroupEqualsItsOwnTree, ForANodeWithoutSomeChildren) {
  const Computed full =
      ComputeCase(WriteCase("groups_without_full_" + GetParam(), kTree, kGroups), GetParam());
  const Computed cut = ComputeCase(
      WriteCase("groups_without_cut_" + GetParam(),
                "  all_but_housing:\n    food: [bread, milk]\n    transport: [fuel, phone]\n", "",
                {"bread", "milk", "fuel", "phone"}),
      GetParam());
  ExpectSameNode(full, full.survey.classification.FindNode("all_but_housing"), cut, 0);
}

// Groups leave the tree's nodes as they were: every tree node of a run with
// three overlapping groups equals the run without them.
TEST_P(GroupEqualsItsOwnTree, LeavesTheTreeNodesUnchanged) {
  const Computed with =
      ComputeCase(WriteCase("groups_with_" + GetParam(), kTree, kGroups), GetParam());
  const Computed without =
      ComputeCase(WriteCase("groups_none_" + GetParam(), kTree, ""), GetParam());
  ASSERT_EQ(with.survey.classification.num_tree_nodes(),
            static_cast<int>(without.survey.classification.nodes().size()));
  EXPECT_EQ(with.survey.classification.nodes().size(),
            without.survey.classification.nodes().size() + 3);
  for (int n = 0; n < without.survey.classification.num_tree_nodes(); ++n) {
    ExpectSameNode(with, n, without, n);
  }
}

INSTANTIATE_TEST_SUITE_P(EveryAggregationMethod, GroupEqualsItsOwnTree,
                         ::testing::ValuesIn(AggregationMethodNames()), [](const auto& param_info) {
                           std::string name = param_info.param;
                           for (char& c : name) c = c == '-' ? '_' : c;
                           return name;
                         });

TEST(Groups, SitAfterTheTreeWithTheirHeadingsInTreeOrder) {
  const std::string dir = WriteCase("groups_layout", kTree, kGroups);
  RunConfig config;
  std::string error;
  ASSERT_TRUE(LoadRunConfig(dir + "/run.yaml", &config, &error)) << error;
  Classification tree = config.classification;
  ASSERT_TRUE(ApplyGroupsAndLabels(config, &tree, &error)) << error;
  ASSERT_EQ(tree.num_tree_nodes(), 11);
  ASSERT_EQ(tree.nodes().size(), 14u);
  // Headings: bread 0, milk 1, rent 2, water 3, power 4, fuel 5, phone 6.
  EXPECT_EQ(tree.nodes()[11].headings, (std::vector<int>{0, 1, 5, 6}));
  EXPECT_EQ(tree.nodes()[12].headings, (std::vector<int>{4, 5}));
  EXPECT_EQ(tree.nodes()[13].headings, (std::vector<int>{0, 4}));
  for (int n = 11; n < 14; ++n) {
    EXPECT_TRUE(tree.nodes()[n].is_group);
    EXPECT_FALSE(tree.nodes()[n].is_leaf);
    EXPECT_EQ(tree.nodes()[n].parent, -1);
    EXPECT_TRUE(tree.nodes()[n].children.empty());
  }
  EXPECT_EQ(tree.nodes()[11].label, "All items without housing");
  EXPECT_EQ(tree.LabelOrCode(13), "mixed");
  // The configuration's own tree is left as it was.
  EXPECT_EQ(config.classification.nodes().size(), 11u);
}

TEST(Groups, AreWrittenToParitiesCsvAsKindGroupWithTheirLabels) {
  const std::string dir =
      WriteCase("groups_csv", kTree,
                std::string(kGroups) + "labels:\n  all: All items\n  rent: Actual rents\n");
  const Computed run = ComputeCase(dir, "geks-fisher");
  const std::string csv = ParitiesCsv(run.survey, run.result, nullptr);
  EXPECT_EQ(csv.substr(0, csv.find('\n')),
            "node,kind,region,parity,expenditure,real_expenditure,real_per_capita_index,"
            "log_se,log_se_robust,rank,num_items,num_quotes,num_headings,source,share_priced,"
            "share_imputed,share_external,label");
  // Each node's row for r1 (and r6) ends with its label, empty when none.
  auto row = [&csv](const std::string& start) {
    const size_t at = csv.find("\n" + start);
    return at == std::string::npos ? std::string()
                                   : csv.substr(at + 1, csv.find('\n', at + 1) - at - 1);
  };
  EXPECT_TRUE(row("all,aggregate,r1,").ends_with(",All items")) << row("all,aggregate,r1,");
  EXPECT_TRUE(row("rent,heading,r1,").ends_with(",Actual rents"));
  const std::string food = row("food,aggregate,r1,");
  EXPECT_TRUE(food.ends_with(",")) << food;
  EXPECT_EQ(std::count(food.begin(), food.end(), ','), 17) << food;  // 18 columns
  EXPECT_TRUE(row("all_but_housing,group,r6,").ends_with(",All items without housing"));
  EXPECT_TRUE(row("mixed,group,r1,").ends_with(","));
  // 14 nodes x 6 regions and the header.
  EXPECT_EQ(std::count(csv.begin(), csv.end(), '\n'), 14 * 6 + 1);
}

// Under the flat tree (no classification given) groups name the headings
// found in the data and the root 'all'.
TEST(Groups, WorkUnderTheFlatTree) {
  const std::string dir = MakeTempDir("groups_flat");
  for (const char* file : {"prices.csv", "expenditure.csv"}) {
    WriteTextFile(dir + "/" + file, ReadTextFile(TestDataPath(std::string("groups/") + file)));
  }
  WriteTextFile(dir + "/run.yaml",
                "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n"
                "groups:\n  no_rent: {from: all, without: rent}\n"
                "  typo: {of: [fule]}\n");
  RunConfig config;
  std::string error;
  ASSERT_TRUE(LoadRunConfig(dir + "/run.yaml", &config, &error)) << error;
  Survey survey;
  LoadSummary load;
  EXPECT_FALSE(LoadSurvey(config, LoadOptions(), &survey, &load));
  EXPECT_EQ(load.message, dir +
                              "/run.yaml:6:15: group 'typo': of 'fule' is not a node of the "
                              "classification; did you mean 'fuel'?");
}

// ---------------------------------------------------------------------------
// Mistakes, each with its exact message.

std::string ParseError(const std::string& yaml) {
  RunConfig config;
  std::string error;
  EXPECT_FALSE(ParseRunConfig(yaml, "/cfg/run.yaml", &config, &error));
  return error;
}

std::string Config(const std::string& rest) {
  return "survey:\n  prices: p.csv\n  expenditure: e.csv\nclassification:\n" + std::string(kTree) +
         rest;
}

TEST(GroupMistakes, ACodeOfTheTreeIsRefused) {
  EXPECT_EQ(ParseError(Config("groups:\n  rent: {of: [water]}\n")),
            "/cfg/run.yaml:10:3: group 'rent': the classification already has a basic heading "
            "with this code; give the group a code of its own");
  EXPECT_EQ(ParseError(Config("groups:\n  food: {of: [bread]}\n")),
            "/cfg/run.yaml:10:3: group 'food': the classification already has an aggregate with "
            "this code; give the group a code of its own");
  EXPECT_EQ(ParseError(Config("groups:\n  g: {of: [bread]}\n  g: {of: [milk]}\n")),
            "/cfg/run.yaml:11:3: key 'g' is given twice (first at line 10); remove one of them");
}

TEST(GroupMistakes, AnUnknownNameGetsTheNearestCode) {
  EXPECT_EQ(ParseError(Config("groups:\n  energy: {of: [power, fule]}\n")),
            "/cfg/run.yaml:10:24: group 'energy': of 'fule' is not a node of the classification; "
            "did you mean 'fuel'?");
  EXPECT_EQ(ParseError(Config("groups:\n  core: {from: al, without: [housing]}\n")),
            "/cfg/run.yaml:10:16: group 'core': from 'al' is not a node of the classification; "
            "did you mean 'all'?");
  EXPECT_EQ(ParseError(Config("groups:\n  core: {from: all, without: [housng]}\n")),
            "/cfg/run.yaml:10:31: group 'core': without 'housng' is not a node of the "
            "classification; did you mean 'housing'?");
  EXPECT_EQ(ParseError(Config("groups:\n  core: {from: all, without: [zzzzzz]}\n")),
            "/cfg/run.yaml:10:31: group 'core': without 'zzzzzz' is not a node of the "
            "classification");
  EXPECT_EQ(ParseError(Config("groups:\n  a: {of: [bread]}\n  b: {of: [a, milk]}\n")),
            "/cfg/run.yaml:11:12: group 'b': of 'a' is a group; groups are made of nodes of the "
            "classification");
  EXPECT_EQ(ParseError(Config("groups:\n  a: {of: [bread], whithout: [milk]}\n")),
            "/cfg/run.yaml:10:20: unknown key 'groups.a.whithout'; did you mean "
            "'groups.a.without'?");
}

TEST(GroupMistakes, AGroupMustKeepAndTakeOutHeadings) {
  EXPECT_EQ(ParseError(Config("groups:\n  a: {label: A}\n")),
            "/cfg/run.yaml:10:3: group 'a': needs 'of' (a list of nodes) or 'from' (a node)");
  EXPECT_EQ(ParseError(Config("groups:\n  a: {of: [food], without: [fuel]}\n")),
            "/cfg/run.yaml:10:29: group 'a': without 'fuel' takes out no heading of the group");
  EXPECT_EQ(ParseError(Config("groups:\n  a: {of: [food], without: [bread, milk]}\n")),
            "/cfg/run.yaml:10:3: group 'a': no basic heading is left");
  EXPECT_EQ(ParseError(Config("groups:\n  a: {of: []}\n")),
            "/cfg/run.yaml:10:11: 'groups.a.of' must be a node code or a list of node codes");
}

TEST(LabelMistakes, AnUnknownCodeOrAGroupIsRefused) {
  EXPECT_EQ(ParseError(Config("labels:\n  fod: Food\n")),
            "/cfg/run.yaml:10:3: labels: 'fod' is not a node of the classification; did you mean "
            "'food'?");
  EXPECT_EQ(ParseError(Config("groups:\n  energy: {of: [power]}\nlabels:\n  energy: Energy\n")),
            "/cfg/run.yaml:12:3: labels: 'energy' is a group; give its label as "
            "groups.energy.label");
  EXPECT_EQ(ParseError(Config("labels: [food]\n")),
            "/cfg/run.yaml:9:9: 'labels' must be a mapping of node codes to labels");
}

TEST(Labels, AreReadForTreeNodes) {
  RunConfig config;
  std::string error;
  ASSERT_TRUE(ParseRunConfig(Config("labels:\n  food: \"Food & drink <all>\"\n  bread: Bread\n"),
                             "/cfg/run.yaml", &config, &error))
      << error;
  Classification tree = config.classification;
  ASSERT_TRUE(ApplyGroupsAndLabels(config, &tree, &error)) << error;
  EXPECT_EQ(tree.nodes()[tree.FindNode("food")].label, "Food & drink <all>");
  EXPECT_EQ(tree.LabelOrCode(tree.FindNode("bread")), "Bread");
  EXPECT_EQ(tree.LabelOrCode(tree.FindNode("milk")), "milk");
  EXPECT_EQ(NodeTitle(tree, tree.FindNode("food")), "'food' (Food & drink <all>)");
}

}  // namespace
}  // namespace paritas
