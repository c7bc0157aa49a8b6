// Tests of the classification tree read from YAML: both written forms, the
// flat default, the depth-first node order, and every malformed tree with its
// exact message (yaml-cpp marks are 0-based; messages are 1-based).
#include "paritas/survey/classification.h"

#include "test_util.h"

namespace paritas {
namespace {

using ::paritas::testing::MakeTempDir;
using ::paritas::testing::ReadTextFile;
using ::paritas::testing::SourcePath;
using ::paritas::testing::WriteTextFile;

Classification Parse(const std::string& yaml) {
  Classification tree;
  std::string error;
  EXPECT_TRUE(Classification::FromYaml(yaml, "tree.yaml", &tree, &error)) << error;
  return tree;
}

std::string ParseError(const std::string& yaml) {
  Classification tree;
  std::string error;
  EXPECT_FALSE(Classification::FromYaml(yaml, "tree.yaml", &tree, &error));
  return error;
}

TEST(Classification, ReadsAMappingOfChildAggregatesHoldingHeadingLists) {
  const Classification tree = Parse(
      "all:\n"
      "  food: [bread, meat]\n"
      "  housing: [rents]\n");
  EXPECT_EQ(tree.NodeCodes(), (std::vector<std::string>{"all", "food", "bread", "meat", "housing", "rents"}));
  EXPECT_EQ(tree.HeadingCodes(), (std::vector<std::string>{"bread", "meat", "rents"}));
  const auto& nodes = tree.nodes();
  EXPECT_EQ(nodes[0].parent, -1);
  EXPECT_EQ(nodes[0].depth, 0);
  EXPECT_EQ(nodes[0].children, (std::vector<int>{1, 4}));
  EXPECT_FALSE(nodes[1].is_leaf);
  EXPECT_EQ(nodes[2].parent, 1);
  EXPECT_EQ(nodes[2].depth, 2);
  EXPECT_TRUE(nodes[2].is_leaf);
  EXPECT_EQ(nodes[0].headings, (std::vector<int>{0, 1, 2}));
  EXPECT_EQ(nodes[4].headings, (std::vector<int>{2}));
  EXPECT_EQ(nodes[5].headings, (std::vector<int>{2}));  // A heading lists itself.
}

TEST(Classification, ReadsAListMixingHeadingCodesAndOneKeyMappings) {
  const Classification tree = Parse(
      "all:\n"
      "  - fuel\n"
      "  - public_transport: [local_fares, rail_fares]\n"
      "  - repairs\n");
  EXPECT_EQ(tree.NodeCodes(), (std::vector<std::string>{"all", "fuel", "public_transport", "local_fares",
                                                        "rail_fares", "repairs"}));
  EXPECT_EQ(tree.HeadingCodes(), (std::vector<std::string>{"fuel", "local_fares", "rail_fares", "repairs"}));
  EXPECT_EQ(tree.FindNode("public_transport"), 2);
  EXPECT_EQ(tree.FindHeading("rail_fares"), 2);
  EXPECT_EQ(tree.FindHeading("public_transport"), -1);  // An aggregate is not a heading.
  EXPECT_EQ(tree.FindNode("nothing"), -1);
  EXPECT_EQ(tree.nodes()[3].depth, 2);
}

TEST(Classification, ReadsTheDemoTree) {
  Classification tree;
  std::string error;
  const std::string path = SourcePath("data/demo/classification.yaml");
  ASSERT_TRUE(Classification::FromYaml(ReadTextFile(path), path, &tree, &error)) << error;
  EXPECT_EQ(tree.headings().size(), 29u);
  EXPECT_EQ(tree.nodes()[0].code, "all");
  EXPECT_EQ(tree.nodes()[0].headings.size(), 29u);
}

TEST(Classification, FlatPutsEveryHeadingUnderOneRoot) {
  const Classification tree = Classification::Flat({"a", "b", "c"});
  EXPECT_EQ(tree.NodeCodes(), (std::vector<std::string>{"all", "a", "b", "c"}));
  EXPECT_EQ(tree.HeadingCodes(), (std::vector<std::string>{"a", "b", "c"}));
  EXPECT_EQ(tree.nodes()[0].children, (std::vector<int>{1, 2, 3}));
  EXPECT_EQ(tree.nodes()[0].headings, (std::vector<int>{0, 1, 2}));
  EXPECT_EQ(tree.nodes()[2].parent, 0);
  EXPECT_EQ(Classification::Flat({"x"}, "total").nodes()[0].code, "total");
}

TEST(Classification, RejectsMoreThanOneRootNamingThem) {
  EXPECT_EQ(ParseError("food: [bread]\nhousing: [rents]\n"),
            "tree.yaml:1:1: the classification must have exactly one root (a mapping with one key), "
            "found 2 roots: food, housing");
}

TEST(Classification, RejectsATreeThatIsNotAMapping) {
  EXPECT_EQ(ParseError("- bread\n- meat\n"),
            "tree.yaml:1:1: the classification must have exactly one root (a mapping with one key)");
  EXPECT_EQ(ParseError(""), "tree.yaml: the classification must have exactly one root (a mapping with one key)");
}

TEST(Classification, RejectsAnEmptyAggregate) {
  EXPECT_EQ(ParseError("all:\n  food: []\n  housing: [rents]\n"), "tree.yaml:2:3: aggregate 'food' has no headings");
  EXPECT_EQ(ParseError("all:\n  food:\n  housing: [rents]\n"), "tree.yaml:2:3: aggregate 'food' has no headings");
  EXPECT_EQ(ParseError("all: {}\n"), "tree.yaml:1:1: aggregate 'all' has no headings");
}

TEST(Classification, RejectsALeafListedTwiceNamingTheFirstLine) {
  EXPECT_EQ(ParseError("all:\n  food: [bread, meat]\n  other:\n    - bread\n"),
            "tree.yaml:4:7: 'bread' is listed twice in the classification (first at line 2)");
}

TEST(Classification, RejectsAnAggregateCodeReusedAsAHeading) {
  EXPECT_EQ(ParseError("all:\n  food: [bread]\n  other: [food]\n"),
            "tree.yaml:3:11: 'food' is listed twice in the classification (first at line 2)");
}

TEST(Classification, RejectsAListEntryThatIsNeitherACodeNorAOneKeyMapping) {
  EXPECT_EQ(ParseError("all:\n  - bread\n  - {a: [x], b: [y]}\n"),
            "tree.yaml:3:5: an entry of 'all' must be a heading code or a one-key mapping (a child aggregate)");
  EXPECT_EQ(ParseError("all:\n  - bread\n  - [x, y]\n"),
            "tree.yaml:3:5: an entry of 'all' must be a heading code or a one-key mapping (a child aggregate)");
}

TEST(Classification, RejectsAnAggregateHoldingAPlainValue) {
  EXPECT_EQ(ParseError("all:\n  food: bread\n"),
            "tree.yaml:2:9: aggregate 'food' must hold a mapping of child aggregates or a list of headings");
}

TEST(Classification, RejectsAnEmptyCode) {
  EXPECT_EQ(ParseError("all:\n  - ''\n"), "tree.yaml:2:5: expected a non-empty code");
}

TEST(Classification, ReportsInvalidYamlWithItsLine) {
  const std::string error = ParseError("all:\n  food: [bread\n");
  EXPECT_EQ(error.rfind("tree.yaml:", 0), 0u) << error;
  EXPECT_NE(error.find(": invalid YAML: "), std::string::npos) << error;
}

// yaml-cpp stops at 500 levels with "invalid YAML: bad file"; nesting is
// refused at the limit instead, with the limit named.
TEST(Classification, RefusesNestingDeeperThanTheLimit) {
  const std::string yaml = "all: " + std::string(600, '[') + std::string(600, ']') + "\n";
  EXPECT_EQ(ParseError(yaml),
            "tree.yaml:1:69: nesting deeper than 64 levels "
            "(limits.max_yaml_depth); raise the limit if the file is right");
  Classification tree;
  std::string error;
  EXPECT_FALSE(Classification::FromYaml("all: [[[a]]]\n", "tree.yaml", &tree, &error, 3));
  EXPECT_EQ(error,
            "tree.yaml:1:8: nesting deeper than 3 levels (limits.max_yaml_depth); raise the "
            "limit if the file is right");
}

TEST(Classification, RefusesACodeGivenTwiceInOneMappingNamingBothLines) {
  // yaml-cpp would keep one of the two 'food' keys without a word.
  EXPECT_EQ(ParseError("all:\n  food: [bread]\n  housing: [rent]\n  food: [milk]\n"),
            "tree.yaml:4:3: key 'food' is given twice (first at line 2); remove one of them");
}

TEST(Classification, RefusesTextThatIsNotUtf8) {
  EXPECT_EQ(ParseError("all:\n  caf\xe9: [bread]\n"),
            "tree.yaml:2:6: line '  caf\\xe9: [bread]' is not valid UTF-8 (the file may be "
            "Latin-1 or Windows-1252: save it as UTF-8)");
}

}  // namespace
}  // namespace paritas
