// Tests of the run configuration: defaults, path resolution against the
// configuration's folder, enum names, classification given inline or by path,
// and the exact message for each mistake (unknown keys suggest the nearest).
#include "paritas/survey/config.h"

#include <filesystem>

#include "test_util.h"

namespace paritas {
namespace {

using ::paritas::testing::MakeTempDir;
using ::paritas::testing::ReadTextFile;
using ::paritas::testing::SourcePath;
using ::paritas::testing::WriteTextFile;

const char kSurvey[] = "survey:\n  prices: p.csv\n  expenditure: e.csv\n";

RunConfig Parse(const std::string& yaml, const std::string& path = "/cfg/run.yaml") {
  RunConfig config;
  std::string error;
  EXPECT_TRUE(ParseRunConfig(yaml, path, &config, &error)) << error;
  return config;
}

std::string ParseError(const std::string& yaml, const std::string& path = "/cfg/run.yaml") {
  RunConfig config;
  std::string error;
  EXPECT_FALSE(ParseRunConfig(yaml, path, &config, &error));
  return error;
}

TEST(RunConfig, DefaultsAreValidOnceFilesAreGiven) {
  RunConfig config;
  std::string error;
  EXPECT_FALSE(config.IsValid(&error));
  EXPECT_EQ(error, "no prices file given (survey.prices)");
  config.survey.prices = {PriceSource{"p.csv", CsvFormat(), {}}};
  config.survey.expenditure = "e.csv";
  EXPECT_TRUE(config.IsValid(&error)) << error;
  EXPECT_EQ(config.elementary, "cpd");
  EXPECT_EQ(config.aggregation, "geks-fisher");
  EXPECT_EQ(config.invalid_rows, InvalidRowPolicy::kStop);
  EXPECT_EQ(config.reference.kind, ReferenceKind::kMean);
}

TEST(RunConfig, ResolvesPathsAgainstTheConfigurationFolder) {
  const RunConfig config = Parse(
      "survey:\n  prices: data/p.csv\n  expenditure: ../e.csv\n  regions: /abs/r.csv\n"
      "  items: ./i.csv\noutput: results\n");
  EXPECT_EQ(config.survey.prices[0].path, "/cfg/data/p.csv");
  EXPECT_EQ(config.survey.expenditure, "/e.csv");
  EXPECT_EQ(config.survey.regions, "/abs/r.csv");
  EXPECT_EQ(config.survey.items, "/cfg/i.csv");
  EXPECT_EQ(config.output, "/cfg/results");
  EXPECT_EQ(config.config_path, "/cfg/run.yaml");
}

TEST(RunConfig, PutsTheDefaultOutputBesideTheConfiguration) {
  EXPECT_EQ(Parse(kSurvey).output, "/cfg/out");
  EXPECT_EQ(Parse(kSurvey, "run.yaml").output, "out");
  EXPECT_EQ(Parse(kSurvey, "run.yaml").survey.prices[0].path, "p.csv");
}

TEST(RunConfig, ReadsEverySetting) {
  const RunConfig config = Parse(std::string(kSurvey) +
                                 "reference: north\nelementary: Jevons-GEKS\naggregation: geks-tornqvist\n"
                                 "invalid_rows: skip\nmatrices: [all]\nrepresentative_weight: 3\n"
                                 "outlier_threshold: 4.5\nreport: false\nthreads: 2\n");
  EXPECT_EQ(config.reference.kind, ReferenceKind::kRegion);
  EXPECT_EQ(config.reference.region, "north");
  EXPECT_EQ(config.elementary, "jevons-geks");
  EXPECT_EQ(config.aggregation, "geks-tornqvist");
  EXPECT_EQ(config.invalid_rows, InvalidRowPolicy::kSkip);
  EXPECT_EQ(config.matrices, std::vector<std::string>{"all"});
  EXPECT_EQ(config.representative_weight, 3.0);
  EXPECT_EQ(config.outlier_threshold, 4.5);
  EXPECT_FALSE(config.report);
  EXPECT_EQ(config.threads, 2);
  EXPECT_FALSE(config.has_classification);
}

TEST(RunConfig, ReadsWeightedMeanReferenceInAnyCase) {
  EXPECT_EQ(Parse(std::string(kSurvey) + "reference: Weighted-Mean\n").reference.kind,
            ReferenceKind::kWeightedMean);
  EXPECT_EQ(Reference::FromString(" mean ").kind, ReferenceKind::kMean);
  EXPECT_EQ(Reference::FromString("cap").ToString(), "cap");
}

TEST(RunConfig, ReadsTheCountryReferenceInAnyCase) {
  EXPECT_EQ(Parse(std::string(kSurvey) + "reference: Country\n").reference.kind,
            ReferenceKind::kCountry);
  EXPECT_EQ(Reference::FromString(" COUNTRY ").kind, ReferenceKind::kCountry);
  EXPECT_EQ(Reference::FromString("country").ToString(), "country");
}

TEST(RunConfig, SuggestsTheNearestTopLevelKeyForATypo) {
  EXPECT_EQ(ParseError(std::string(kSurvey) + "refrence: mean\n"),
            "/cfg/run.yaml:4:1: unknown key 'refrence'; did you mean 'reference'?");
}

TEST(RunConfig, SuggestsTheNearestSurveyKeyForATypo) {
  EXPECT_EQ(ParseError("survey:\n  pricess: p.csv\n  expenditure: e.csv\n"),
            "/cfg/run.yaml:2:3: unknown key 'survey.pricess'; did you mean 'survey.prices'?");
}

TEST(RunConfig, RobustErrorsReadsTheSandwichKind) {
  EXPECT_EQ(Parse(kSurvey).robust_errors, "hc1");
  EXPECT_EQ(Parse(std::string(kSurvey) + "robust_errors: HC1\n").robust_errors, "hc1");
  EXPECT_EQ(ParseError(std::string(kSurvey) + "robust_errors: hc2\n"),
            "/cfg/run.yaml:4:16: robust_errors 'hc2' is not one of: off, hc0, hc1, hc3; did you "
            "mean 'hc0'?");
}

TEST(RunConfig, OldRobustStandardErrorsBooleanIsRefusedWithItsReplacement) {
  EXPECT_EQ(ParseError(std::string(kSurvey) + "robust_standard_errors: true\n"),
            "/cfg/run.yaml:4:1: robust_standard_errors was replaced by robust_errors (off, hc0, "
            "hc1, hc3); write 'robust_errors: hc0' for what 'true' gave, or 'robust_errors: "
            "hc1', which is not biased low on few items");
}

TEST(RunConfig, ShortensAHugeUnknownKey) {
  // An explicit key ("? key"), since YAML's plain keys end at 1,024 bytes.
  EXPECT_EQ(ParseError(std::string(kSurvey) + "? " + std::string(100000, 'k') + "\n: 1\n"),
            "/cfg/run.yaml:4:3: unknown key '" + std::string(60, 'k') +
                "...'; valid keys are: survey, classification, reference, elementary, aggregation, "
                "invalid_rows, output, matrices, matrices_up_to_regions, representative_weight, "
                "cpd_cell_weights, outlier_threshold, outlier_fit, robust_errors, report, "
                "report_region, threads, limits, duplicate_quotes, strict, checks, "
                "missing_parities, groups, labels");
}

TEST(RunConfig, ListsTheValidKeysWhenNoneIsClose) {
  // The list grows with new settings, so only its stable start is pinned.
  const std::string error = ParseError(std::string(kSurvey) + "colour: blue\n");
  const std::string start =
      "/cfg/run.yaml:4:1: unknown key 'colour'; valid keys are: survey, classification, reference, "
      "elementary, aggregation, invalid_rows, output, matrices, ";
  EXPECT_EQ(error.substr(0, start.size()), start);
  EXPECT_NE(error.find(", threads"), std::string::npos) << error;
}

TEST(RunConfig, ListsTheAllowedNamesForABadElementaryMethod) {
  EXPECT_EQ(ParseError(std::string(kSurvey) + "elementary: jevons\n"),
            "/cfg/run.yaml:4:13: elementary 'jevons' is not one of: cpd, cprd, jevons-geks, robust-cpd");
}

TEST(RunConfig, ListsTheAllowedNamesForABadAggregationMethod) {
  EXPECT_EQ(ParseError(std::string(kSurvey) + "aggregation: fisher\n"),
            "/cfg/run.yaml:4:14: aggregation 'fisher' is not one of: geks-fisher, geks-tornqvist, "
            "weighted-cpd, spanning-tree, geary-khamis, ikle-dikhanov-balk");
}

TEST(RunConfig, ListsTheAllowedNamesForABadInvalidRowPolicy) {
  EXPECT_EQ(ParseError(std::string(kSurvey) + "invalid_rows: ignore\n"),
            "/cfg/run.yaml:4:15: invalid_rows 'ignore' is not one of: stop, skip");
}

// Named values written with '_' for '-', or misspelt, get a suggestion: a
// trial wrote weighted_mean and was told only that no region has that code.
TEST(RunConfig, SuggestsTheNameMeantForAReferenceWithUnderscores) {
  EXPECT_EQ(ParseError(std::string(kSurvey) + "reference: weighted_mean\n"),
            "/cfg/run.yaml:4:12: reference 'weighted_mean' is not one of: mean, weighted-mean, country, or "
            "a region code; did you mean 'weighted-mean'?");
  EXPECT_EQ(ParseError(std::string(kSurvey) + "reference: WEIGHTED MEAN\n"),
            "/cfg/run.yaml:4:12: reference 'WEIGHTED MEAN' is not one of: mean, weighted-mean, country, or "
            "a region code; did you mean 'weighted-mean'?");
  // Any other text is a region code, checked against the survey later.
  EXPECT_EQ(Parse(std::string(kSurvey) + "reference: weighted_meat\n").reference.region,
            "weighted_meat");
}

TEST(RunConfig, SuggestsTheNameMeantForEveryNamedValue) {
  EXPECT_EQ(ParseError(std::string(kSurvey) + "elementary: robust_cpd\n"),
            "/cfg/run.yaml:4:13: elementary 'robust_cpd' is not one of: cpd, cprd, jevons-geks, "
            "robust-cpd; did you mean 'robust-cpd'?");
  EXPECT_EQ(ParseError(std::string(kSurvey) + "aggregation: GEKS_Tornqvist\n"),
            "/cfg/run.yaml:4:14: aggregation 'GEKS_Tornqvist' is not one of: geks-fisher, "
            "geks-tornqvist, weighted-cpd, spanning-tree, geary-khamis, ikle-dikhanov-balk; did you "
            "mean 'geks-tornqvist'?");
  EXPECT_EQ(ParseError(std::string(kSurvey) + "invalid_rows: Skipp\n"),
            "/cfg/run.yaml:4:15: invalid_rows 'Skipp' is not one of: stop, skip; did you mean "
            "'skip'?");
}

TEST(EnumNames, RoundTripThroughToStringAndFromString) {
  for (const std::string& name : InvalidRowPolicyNames()) {
    InvalidRowPolicy policy;
    ASSERT_TRUE(FromString(name, &policy)) << name;
    EXPECT_EQ(ToString(policy), name);
  }
  InvalidRowPolicy policy = InvalidRowPolicy::kStop;
  EXPECT_TRUE(FromString("SKIP", &policy));
  EXPECT_EQ(policy, InvalidRowPolicy::kSkip);
  EXPECT_FALSE(FromString("skipping", &policy));
}

TEST(RunConfig, RequiresPricesAndExpenditure) {
  EXPECT_EQ(ParseError("reference: mean\n"),
            "/cfg/run.yaml: missing key 'survey' (with at least 'prices' and 'expenditure')");
  EXPECT_EQ(ParseError("survey:\n  prices: p.csv\n"), "/cfg/run.yaml:2:3: missing key 'survey.expenditure'");
  EXPECT_EQ(ParseError("survey: p.csv\n"),
            "/cfg/run.yaml:1:9: 'survey' must be a mapping with keys prices, expenditure, regions, items");
}

TEST(RunConfig, RejectsAConfigurationThatIsNotAMapping) {
  EXPECT_EQ(ParseError("- a\n- b\n"),
            "/cfg/run.yaml: the configuration must be a mapping of keys (survey, classification, ...)");
}

TEST(RunConfig, RejectsBadNumbersAndFlags) {
  EXPECT_EQ(ParseError(std::string(kSurvey) + "representative_weight: heavy\n"),
            "/cfg/run.yaml:4:24: 'representative_weight' must be a number, found 'heavy'");
  EXPECT_EQ(ParseError(std::string(kSurvey) + "representative_weight: -1\n"),
            "/cfg/run.yaml:4:24: representative_weight must be positive, found '-1'");
  EXPECT_EQ(ParseError(std::string(kSurvey) + "representative_weight: 1e-300\n"),
            "/cfg/run.yaml:4:24: representative_weight must be a number from 0.001 to 1000, found "
            "'1e-300'");
  EXPECT_EQ(ParseError(std::string(kSurvey) + "outlier_threshold: 0\n"),
            "/cfg/run.yaml:4:20: outlier_threshold must be positive, found '0'");
  EXPECT_EQ(ParseError(std::string(kSurvey) + "report: maybe\n"),
            "/cfg/run.yaml:4:9: report must be true or false, found 'maybe'");
  EXPECT_EQ(ParseError(std::string(kSurvey) + "threads: 1.5\n"),
            "/cfg/run.yaml:4:10: threads must be a whole number from 0 (all cores) to 1024, found '1.5'");
  EXPECT_EQ(ParseError(std::string(kSurvey) + "reference: [a, b]\n"),
            "/cfg/run.yaml:4:12: 'reference' must be a single value");
}

TEST(RunConfig, ReadsAnInlineClassification) {
  const RunConfig config = Parse(std::string(kSurvey) +
                                 "classification:\n  all:\n    food: [bread, meat]\n    housing: [rents]\n");
  EXPECT_TRUE(config.has_classification);
  EXPECT_EQ(config.classification_source, "/cfg/run.yaml");
  EXPECT_EQ(config.classification.HeadingCodes(), (std::vector<std::string>{"bread", "meat", "rents"}));
}

TEST(RunConfig, ReportsInlineClassificationErrorsAtTheConfigurationLine) {
  EXPECT_EQ(ParseError(std::string(kSurvey) + "classification:\n  all:\n    food: []\n"),
            "/cfg/run.yaml:6:5: aggregate 'food' has no headings");
  EXPECT_EQ(ParseError(std::string(kSurvey) + "classification:\n  food: [a]\n  housing: [b]\n"),
            "/cfg/run.yaml:5:3: the classification must have exactly one root (a mapping with one key), "
            "found 2 roots: food, housing");
}

TEST(RunConfig, ReadsAClassificationFileRelativeToTheConfiguration) {
  const std::string dir = MakeTempDir("config_classification_path");
  WriteTextFile(dir + "/trees/tree.yaml", "total:\n  - a\n  - group: [b, c]\n");
  WriteTextFile(dir + "/run.yaml", std::string(kSurvey) + "classification: trees/tree.yaml\n");
  RunConfig config;
  std::string error;
  ASSERT_TRUE(LoadRunConfig(dir + "/run.yaml", &config, &error)) << error;
  EXPECT_TRUE(config.has_classification);
  EXPECT_EQ(config.classification_source, dir + "/trees/tree.yaml");
  EXPECT_EQ(config.classification.HeadingCodes(), (std::vector<std::string>{"a", "b", "c"}));
  EXPECT_EQ(config.survey.prices[0].path, dir + "/p.csv");
}

TEST(RunConfig, ReportsClassificationFileErrorsInThatFile) {
  const std::string dir = MakeTempDir("config_classification_bad");
  WriteTextFile(dir + "/tree.yaml", "all:\n  - a\n  - a\n");
  WriteTextFile(dir + "/run.yaml", std::string(kSurvey) + "classification: tree.yaml\n");
  RunConfig config;
  std::string error;
  EXPECT_FALSE(LoadRunConfig(dir + "/run.yaml", &config, &error));
  EXPECT_EQ(error, dir + "/tree.yaml:3:5: 'a' is listed twice in the classification (first at line 2)");
  WriteTextFile(dir + "/run.yaml", std::string(kSurvey) + "classification: missing.yaml\n");
  EXPECT_FALSE(LoadRunConfig(dir + "/run.yaml", &config, &error));
  EXPECT_EQ(error, dir + "/missing.yaml: cannot open file: No such file or directory");
}

TEST(RunConfig, ReportsAMissingConfigurationFile) {
  RunConfig config;
  std::string error;
  const std::string dir = MakeTempDir("config_missing");
  EXPECT_FALSE(LoadRunConfig(dir + "/none.yaml", &config, &error));
  EXPECT_EQ(error, dir + "/none.yaml: cannot open file: No such file or directory");
}

TEST(RunConfig, ReportsInvalidYamlWithLineAndColumn) {
  const std::string error = ParseError("survey:\n  prices: [p.csv\n");
  EXPECT_EQ(error.rfind("/cfg/run.yaml:", 0), 0u) << error;
  EXPECT_NE(error.find("invalid YAML: "), std::string::npos) << error;
}

// A classification of n aggregates each holding the next, the last one
// heading: n + 1 levels of YAML nesting.
std::string DeepTree(int n) {
  std::string yaml;
  for (int level = 0; level + 1 < n; ++level) {
    yaml += std::string(2 * level, ' ') + "a" + std::to_string(level) + ":\n";
  }
  return yaml + std::string(2 * (n - 1), ' ') + "last: [heading]\n";
}

// yaml-cpp stops at 500 levels with "bad file"; nesting is now refused at
// the limit, before yaml-cpp recurses that deep, with a message saying so.
TEST(RunConfig, RefusesNestingDeeperThanTheLimit) {
  const std::string message = ParseError(
      std::string(kSurvey) + "matrices: " + std::string(600, '[') + std::string(600, ']') + "\n");
  EXPECT_EQ(message,
            "/cfg/run.yaml:4:74: nesting deeper than 64 levels (limits.max_yaml_depth; the "
            "configuration file itself is read under the default); move a deep classification into "
            "a file of its own");
  const std::string dir = MakeTempDir("config_deep_tree");
  WriteTextFile(dir + "/tree.yaml", DeepTree(70));
  WriteTextFile(dir + "/run.yaml", std::string(kSurvey) + "classification: tree.yaml\n");
  RunConfig config;
  std::string error;
  EXPECT_FALSE(LoadRunConfig(dir + "/run.yaml", &config, &error));
  EXPECT_EQ(error, dir +
                       "/tree.yaml:65:129: nesting deeper than 64 levels (limits.max_yaml_depth); "
                       "raise the limit if the file is right");
  WriteTextFile(
      dir + "/run.yaml",
      std::string(kSurvey) + "classification: tree.yaml\nlimits:\n  max_yaml_depth: 100\n");
  ASSERT_TRUE(LoadRunConfig(dir + "/run.yaml", &config, &error)) << error;
  EXPECT_EQ(config.classification.headings().size(), 1u);
  EXPECT_EQ(config.classification.nodes().back().depth, 70);
}

TEST(RunConfig, ReadsTheLimitsSection) {
  const RunConfig defaults = Parse(kSurvey);
  EXPECT_EQ(defaults.limits.max_record_bytes, ReadLimits().max_record_bytes);
  const RunConfig config = Parse(std::string(kSurvey) +
                                 "limits:\n  max_file_bytes: 1 GiB\n  max_yaml_bytes: 4MiB\n"
                                 "  max_record_bytes: 65536\n  max_field_bytes: 4 KiB\n"
                                 "  max_yaml_depth: 16\n");
  EXPECT_EQ(config.limits.max_file_bytes, int64_t{1} << 30);
  EXPECT_EQ(config.limits.max_yaml_bytes, int64_t{4} << 20);
  EXPECT_EQ(config.limits.max_record_bytes, 65536);
  EXPECT_EQ(config.limits.max_field_bytes, 4096);
  EXPECT_EQ(config.limits.max_yaml_depth, 16);
  EXPECT_EQ(ParseError(std::string(kSurvey) + "limits:\n  max_recrd_bytes: 1\n"),
            "/cfg/run.yaml:5:3: unknown key 'limits.max_recrd_bytes'; did you mean "
            "'limits.max_record_bytes'?");
  EXPECT_EQ(ParseError(std::string(kSurvey) + "limits:\n  max_field_bytes: lots\n"),
            "/cfg/run.yaml:5:20: limits.max_field_bytes must be a whole number of bytes from 1 to "
            "1 TiB, optionally with a unit (KiB, MiB, GiB, TiB), found 'lots'");
  EXPECT_EQ(ParseError(std::string(kSurvey) + "limits:\n  max_file_bytes: 0\n"),
            "/cfg/run.yaml:5:19: limits.max_file_bytes must be a whole number of bytes from 1 to "
            "1 TiB, optionally with a unit (KiB, MiB, GiB, TiB), found '0'");
  EXPECT_EQ(ParseError(std::string(kSurvey) + "limits:\n  max_yaml_depth: 1000\n"),
            "/cfg/run.yaml:5:19: limits.max_yaml_depth must be a whole number from 1 to 256, found "
            "'1000'");
  EXPECT_EQ(
      ParseError(std::string(kSurvey) + "limits: 5\n"),
      "/cfg/run.yaml:4:9: 'limits' must be a mapping with keys max_file_bytes, max_yaml_bytes, "
      "max_record_bytes, max_field_bytes, max_yaml_depth");
}

TEST(RunConfig, RefusesAClassificationFileBeyondTheYamlLimit) {
  const std::string dir = MakeTempDir("config_big_tree");
  std::string tree = "all:\n";
  for (int h = 0; h < 100000; ++h) tree += "  - heading" + std::to_string(h) + "\n";
  WriteTextFile(dir + "/tree.yaml", tree);  // About 1.8 MB.
  WriteTextFile(dir + "/run.yaml", std::string(kSurvey) + "classification: tree.yaml\n");
  RunConfig config;
  std::string error;
  EXPECT_FALSE(LoadRunConfig(dir + "/run.yaml", &config, &error));
  EXPECT_EQ(error, dir +
                       "/tree.yaml: file larger than 1 MiB (limits.max_yaml_bytes); raise the "
                       "limit if the file is right");
  WriteTextFile(
      dir + "/run.yaml",
      std::string(kSurvey) + "limits:\n  max_yaml_bytes: 2 MiB\nclassification: tree.yaml\n");
  ASSERT_TRUE(LoadRunConfig(dir + "/run.yaml", &config, &error)) << error;
  EXPECT_EQ(config.classification.headings().size(), 100000u);
  // The configuration file itself is read under the default.
  WriteTextFile(dir + "/run.yaml", std::string(kSurvey) + "classification:\n  " +
                                       std::string(20, ' ') + "\n" + std::string(2 << 20, '#') +
                                       "\n");
  EXPECT_FALSE(LoadRunConfig(dir + "/run.yaml", &config, &error));
  EXPECT_EQ(error, dir +
                       "/run.yaml: file larger than 1 MiB (limits.max_yaml_bytes; the "
                       "configuration file itself is read under the default); move a large "
                       "classification into a file of its own");
}

TEST(RunConfig, ReadsMatricesAsACodeAListOrACommaSeparatedList) {
  EXPECT_EQ(Parse(std::string(kSurvey) + "matrices: all\n").matrices,
            std::vector<std::string>{"all"});
  EXPECT_EQ(Parse(std::string(kSurvey) + "matrices: [food, all]\n").matrices,
            (std::vector<std::string>{"food", "all"}));
  EXPECT_EQ(Parse(std::string(kSurvey) + "matrices: food, housing\n").matrices,
            (std::vector<std::string>{"food", "housing"}));
  EXPECT_EQ(ParseError(std::string(kSurvey) + "matrices: food,,housing\n"),
            "/cfg/run.yaml:4:11: matrices: an empty name in 'food,,housing'");
}

// "all" means every node only as the only value: the demo's root is also
// called "all", and `--matrices all food` asks for those two nodes.
TEST(MatricesMeanEveryNode, OnlyForALoneAll) {
  EXPECT_TRUE(MatricesMeanEveryNode({"all"}));
  EXPECT_TRUE(MatricesMeanEveryNode({"ALL"}));
  EXPECT_FALSE(MatricesMeanEveryNode({"all", "food"}));
  EXPECT_FALSE(MatricesMeanEveryNode({"food"}));
  EXPECT_FALSE(MatricesMeanEveryNode({}));
}

TEST(SplitNameList, SplitsOnCommasTrimsAndRefusesEmptyNames) {
  std::vector<std::string> names;
  std::string error;
  ASSERT_TRUE(SplitNameList({"food, housing", "all"}, &names, &error)) << error;
  EXPECT_EQ(names, (std::vector<std::string>{"food", "housing", "all"}));
  EXPECT_FALSE(SplitNameList({"food,"}, &names, &error));
  EXPECT_EQ(error, "an empty name in 'food,'");
}

TEST(RunConfig, ReadsTheDemoConfiguration) {
  RunConfig config;
  std::string error;
  ASSERT_TRUE(LoadRunConfig(SourcePath("config/demo.yaml"), &config, &error)) << error;
  EXPECT_TRUE(config.has_classification);
  EXPECT_EQ(config.classification.headings().size(), 29u);
  EXPECT_TRUE(std::filesystem::exists(config.survey.prices[0].path))
      << config.survey.prices[0].path;
  EXPECT_TRUE(std::filesystem::exists(config.survey.regions)) << config.survey.regions;
}

TEST(RunConfig, ReadsADelimiterAndADecimalMarkPerFile) {
  const RunConfig config = Parse(
      "survey:\n"
      "  prices: {path: p.csv, delimiter: ';', decimal: ','}\n"
      "  expenditure:\n    path: e.csv\n    delimiter: tab\n"
      "  regions: {path: r.csv, delimiter: \"\\t\"}\n"
      "  items: i.csv\n");
  EXPECT_EQ(config.survey.prices[0].path, "/cfg/p.csv");
  EXPECT_EQ(config.survey.prices[0].format.delimiter, ';');
  EXPECT_EQ(config.survey.prices[0].format.decimal, ',');
  EXPECT_EQ(config.survey.expenditure, "/cfg/e.csv");
  EXPECT_EQ(config.survey.expenditure_format.delimiter, '\t');
  EXPECT_EQ(config.survey.expenditure_format.decimal, '.');
  EXPECT_EQ(config.survey.regions_format.delimiter, '\t');
  EXPECT_EQ(config.survey.items_format.delimiter, ',');
  EXPECT_EQ(config.survey.items_format.decimal, '.');
}

TEST(RunConfig, RefusesBadDelimitersAndDecimalMarksNamingTheKey) {
  EXPECT_EQ(ParseError("survey:\n  prices: {path: p.csv, delimiter: '|'}\n  expenditure: e.csv\n"),
            "/cfg/run.yaml:2:36: survey.prices.delimiter '|' is not one of: ',', ';', tab");
  EXPECT_EQ(ParseError("survey:\n  prices: {path: p.csv, decimal: ','}\n  expenditure: e.csv\n"),
            "/cfg/run.yaml:2:11: survey.prices: decimal ',' needs delimiter ';' or tab (a comma "
            "cannot separate both)");
  EXPECT_EQ(ParseError("survey:\n  prices: {delimiter: ';'}\n  expenditure: e.csv\n"),
            "/cfg/run.yaml:2:11: missing key 'survey.prices.path'");
  EXPECT_EQ(ParseError("survey:\n  prices: {path: p.csv, delimeter: ';'}\n  expenditure: e.csv\n"),
            "/cfg/run.yaml:2:25: unknown key 'survey.prices.delimeter'; did you mean "
            "'survey.prices.delimiter'?");
}

TEST(RunConfig, RefusesAKeyGivenTwiceNamingBothLines) {
  EXPECT_EQ(ParseError(std::string(kSurvey) + "reference: mean\nthreads: 2\nreference: AAR\n"),
            "/cfg/run.yaml:6:1: key 'reference' is given twice (first at line 4); remove one of "
            "them");
  EXPECT_EQ(ParseError("survey:\n  prices: p.csv\n  expenditure: e.csv\n  prices: q.csv\n"),
            "/cfg/run.yaml:4:3: key 'prices' is given twice (first at line 2); remove one of them");
  // The same key in two different mappings is no repetition.
  Parse(std::string(kSurvey) +
        "limits: {max_yaml_depth: 10}\nclassification:\n  all:\n"
        "    limits: [a]\n    b: [c]\n");
}

TEST(RunConfig, RefusesAnInlineClassificationKeyGivenTwice) {
  EXPECT_EQ(ParseError(std::string(kSurvey) +
                       "classification:\n  all:\n    food: [bread]\n    food: [milk]\n"),
            "/cfg/run.yaml:7:5: key 'food' is given twice (first at line 6); remove one of them");
}

TEST(RunConfig, ReportsTextThatIsNotUtf8WithLineAndColumn) {
  // A path written in Latin-1: column 18 counts characters, not bytes.
  EXPECT_EQ(ParseError("survey:\n  prices: data/\xc3\xa9t\xe9.csv\n  expenditure: e.csv\n"),
            "/cfg/run.yaml:2:18: line '  prices: data/\xc3\xa9t\\xe9.csv' is not valid UTF-8 (the "
            "file may be Latin-1 or Windows-1252: save it as UTF-8)");
}

// The error's parts: the place and key/value recorded as the message is
// built, for every kind of mistake (lines and columns counted by hand).
ConfigError ParseFailure(const std::string& yaml) {
  RunConfig config;
  ConfigError error;
  EXPECT_FALSE(ParseRunConfig(yaml, "/cfg/run.yaml", &config, &error));
  std::string text;
  EXPECT_FALSE(ParseRunConfig(yaml, "/cfg/run.yaml", &config, &text));
  EXPECT_EQ(error.message, text);  // the parts never change the message
  EXPECT_EQ(error.file, "/cfg/run.yaml");
  return error;
}

TEST(ConfigError, UnknownKeyHasItsDottedPathAndValue) {
  const ConfigError e = ParseFailure(std::string(kSurvey) + "checks:\n  max_spread_percnt: 5\n");
  EXPECT_EQ(e.message,
            "/cfg/run.yaml:5:3: unknown key 'checks.max_spread_percnt'; did you mean "
            "'checks.max_spread_percent'?");
  EXPECT_EQ(e.line, 5);
  EXPECT_EQ(e.column, 3);
  EXPECT_EQ(e.key, "checks.max_spread_percnt");
  EXPECT_EQ(e.value, "5");
}

TEST(ConfigError, BadValueHasItsKeyAndTextAtTheValue) {
  // "invalid_rows: halt" on line 4: the value starts in column 15.
  const ConfigError e = ParseFailure(std::string(kSurvey) + "invalid_rows: halt\n");
  EXPECT_EQ(e.message, "/cfg/run.yaml:4:15: invalid_rows 'halt' is not one of: stop, skip");
  EXPECT_EQ(e.line, 4);
  EXPECT_EQ(e.column, 15);
  EXPECT_EQ(e.key, "invalid_rows");
  EXPECT_EQ(e.value, "halt");
}

TEST(ConfigError, RangeErrorAfterAGoodReadKeepsTheKey) {
  // A number read fine, then refused by its range: still about that value.
  const ConfigError e = ParseFailure(std::string(kSurvey) + "threads: 2.5\n");
  EXPECT_EQ(e.message,
            "/cfg/run.yaml:4:10: threads must be a whole number from 0 (all cores) to 1024, "
            "found '2.5'");
  EXPECT_EQ(e.key, "threads");
  EXPECT_EQ(e.value, "2.5");
}

TEST(ConfigError, MissingSectionHasNeitherPlaceNorKey) {
  const ConfigError e = ParseFailure("reference: mean\n");
  EXPECT_EQ(e.message,
            "/cfg/run.yaml: missing key 'survey' (with at least 'prices' and 'expenditure')");
  EXPECT_EQ(e.line, 0);
  EXPECT_EQ(e.column, 0);
  EXPECT_EQ(e.key, "");
  EXPECT_EQ(e.value, "");
}

TEST(ConfigError, MappingWhereAValueBelongsHasTheKeyButNoText) {
  const ConfigError e = ParseFailure(std::string(kSurvey) + "strict: {a: 1}\n");
  EXPECT_EQ(e.message, "/cfg/run.yaml:4:9: 'strict' must be a single value");
  EXPECT_EQ(e.key, "strict");
  EXPECT_EQ(e.value, "");
}

}  // namespace
}  // namespace paritas
